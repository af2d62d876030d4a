// State files: a small binary container for what a run keeps between its
// steps (observed state of one part, decisions of one part; docs/parts.md).
// This unit knows nothing of stages: it holds named sections
// of bytes, and writes and reads numbers, strings and arrays inside them.
//
// Layout (all numbers little-endian):
//   magic "PSFTSTAT" (8 bytes), format version (u32), kind (u32 length + bytes),
//   payload length (u64), payload, XXH3-128 of everything before it (16 bytes).
//   The payload is a sequence of sections: name (u32 length + bytes), body
//   length (u64), body.
// A reader refuses a file with another magic, another format version, another
// kind, a wrong length or a wrong checksum, with an error that names the file.
//
// Thread-safety: a writer or reader is used by one thread at a time.
#pragma once

#include <cstdint>
#include <cstring>
#include <string>
#include <string_view>
#include <type_traits>
#include <vector>

#include "core/status.h"

namespace prefsift {

inline constexpr uint32_t kStateFormatVersion = 2;  // 2: the near stage keeps key sketches

class StateWriter {
 public:
  // Sections do not nest; Begin closes nothing, so call End before the next Begin.
  void BeginSection(std::string_view name);
  void EndSection();

  void U8(uint8_t v) { Raw(&v, 1); }
  void U32(uint32_t v) { Raw(&v, 4); }
  void U64(uint64_t v) { Raw(&v, 8); }
  void I64(int64_t v) { Raw(&v, 8); }
  void F32(float v) { Raw(&v, 4); }
  void F64(double v) { Raw(&v, 8); }
  void Str(std::string_view s) {
    U64(s.size());
    Raw(s.data(), s.size());
  }
  // A count, then the values' bytes (trivially copyable values only).
  template <typename T>
  void Array(const T* data, size_t n) {
    static_assert(std::is_trivially_copyable_v<T>);
    U64(n);
    Raw(data, n * sizeof(T));
  }
  template <typename T, typename A>
  void Vec(const std::vector<T, A>& v) { Array(v.data(), v.size()); }

  // The whole file for `kind` (e.g. "observed"); the writer is spent after.
  std::string Finish(std::string_view kind);

 private:
  void Raw(const void* p, size_t n) { body_.append(static_cast<const char*>(p), n); }
  std::string payload_, body_, section_;
  bool open_ = false;
};

class StateReader {
 public:
  // Checks magic, version, kind, length and checksum of `bytes`, read from
  // `path` (named in every error).
  static Result<StateReader> Open(std::string bytes, std::string_view kind, const std::string& path);

  // Moves to the named section (false when the file has none); reads then
  // stay inside it.
  bool EnterSection(std::string_view name);
  // Ok when every read of the section so far was in bounds and the section
  // was read to its end; else an error naming the file and section.
  Status LeaveSection();

  // Reads past the section's end return zero values and set the error.
  uint8_t U8() { return Num<uint8_t>(); }
  uint32_t U32() { return Num<uint32_t>(); }
  uint64_t U64() { return Num<uint64_t>(); }
  int64_t I64() { return Num<int64_t>(); }
  float F32() { return Num<float>(); }
  double F64() { return Num<double>(); }
  std::string Str();
  // A count that must fit the section's rest at `min_bytes` each (so a damaged
  // count never makes a huge allocation).
  uint64_t Count(size_t min_bytes);
  template <typename T, typename A>
  void Vec(std::vector<T, A>* out) {
    static_assert(std::is_trivially_copyable_v<T>);
    uint64_t n = Count(sizeof(T));
    out->resize(n);
    Raw(out->data(), n * sizeof(T));
  }
  // Appends the array's values to *out.
  template <typename T, typename A>
  void AppendVec(std::vector<T, A>* out) {
    static_assert(std::is_trivially_copyable_v<T>);
    uint64_t n = Count(sizeof(T));
    size_t at = out->size();
    out->resize(at + n);
    Raw(out->data() + at, n * sizeof(T));
  }

  bool ok() const { return ok_; }
  // Marks the section bad with a reason (a value out of range, a count that
  // does not match); the first reason is kept.
  void Fail(const std::string& why);
  const std::string& path() const { return path_; }

 private:
  template <typename T>
  T Num() {
    T v{};
    Raw(&v, sizeof(T));
    return v;
  }
  void Raw(void* p, size_t n);
  std::string bytes_, path_, section_, why_;
  size_t pos_ = 0, end_ = 0;
  bool ok_ = true;
};

}  // namespace prefsift
