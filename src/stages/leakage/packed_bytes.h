// PackBytes / UnpackBytes: a block of memory kept compressed (zstd, fast
// level) while nothing reads it, so a table that is needed only before and
// after a long pass need not be held whole in between (FlatRows::Pack;
// docs/leakage.md "Memory"). Lossless: Unpack gives back the same bytes.
// Thread-safety: pure functions over their arguments.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace prefsift {

// Compresses `bytes` into *packed (replacing its contents, sized to fit).
// False when zstd fails (then *packed is empty).
bool PackBytes(std::span<const std::byte> bytes, std::vector<char>* packed);

// Decompresses `packed` into `out`, which must be exactly as long as the
// bytes packed. False when the data does not decompress to that length.
bool UnpackBytes(std::span<const char> packed, std::span<std::byte> out);

}  // namespace prefsift
