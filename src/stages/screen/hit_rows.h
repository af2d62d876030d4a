// The screen's findings of one record as kept from pass 1 to pass 2 (Hit,
// RecordHits), and HitRows, where the stage keeps every record's: each row
// encoded once into a SharedArena (the hits' fixed fields, then the masked
// previews and metadata pointers back to back), 8 bytes a record for the
// row's address. Before, a record with one finding held three heap blocks
// (the row, its vector of hits, the preview's characters), about 190 bytes
// in malloc's chunks; now about 70 (docs/personal-data.md, "Memory").
//
// Thread-safety: Set may be called from several threads at once for
// different rows; reserve, resize, Reset and clear must not run concurrently
// with anything else. Rows are read while nothing writes.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <string>
#include <vector>

#include "core/shared_arena.h"
#include "screen/rules.h"

namespace prefsift {

// Where in a record a scanned string is.
enum class HitPart : uint8_t { kPrompt = 0, kTurn = 1, kCandidate = 2, kMetadata = 3 };

// One finding as kept after Observe: the place and the span, never the text.
struct Hit {
  HitPart part = HitPart::kPrompt;
  uint32_t index = 0;         // turn or candidate index; metadata: index of the string
  uint32_t rule = 0;          // index into the rule list
  uint32_t begin = 0, end = 0;
  screen::Action action = screen::Action::kFlag;
  float confidence = 0;
  uint64_t text_hash = 0;     // XXH3 of the scanned string, checked again in Rewrite
  std::string meta_pointer;   // metadata only: the pointer from the record's root
  std::string preview;        // masked form (screen::MaskedPreview), never the value
};

struct RecordHits {
  std::vector<Hit> hits;
  bool drop = false;       // a finding with action drop
  bool rewrite = false;    // a finding with action mask or pseudonymise, or drop
};

class HitRows {
 public:
  void reserve(size_t n) { rows_.reserve(n); }
  void resize(size_t n) { rows_.resize(n, nullptr); }
  size_t size() const { return rows_.size(); }
  void clear();

  // Whether row i was set (a record with a finding).
  bool Has(size_t i) const { return rows_[i] != nullptr; }
  // The row's flags and count, without decoding it.
  bool drop(size_t i) const { return rows_[i] && (Header(i).flags & kDrop) != 0; }
  bool rewrite(size_t i) const { return rows_[i] && (Header(i).flags & kRewrite) != 0; }
  size_t hit_count(size_t i) const { return rows_[i] ? Header(i).count : 0; }
  // Row i decoded (empty when it has none).
  RecordHits Get(size_t i) const;

  // Stores `r` as row i (a copy). REQUIRES: i < size().
  void Set(size_t i, const RecordHits& r);
  void Reset(size_t i) { rows_[i] = nullptr; }  // (its bytes are freed by clear())

  size_t bytes() const { return rows_.capacity() * sizeof(const void*) + arena_.bytes(); }

 private:
  static constexpr uint8_t kDrop = 1, kRewrite = 2;
  struct RowHeader {
    uint32_t count;
    uint8_t flags;
  };
  RowHeader Header(size_t i) const {
    RowHeader h;
    std::memcpy(&h, rows_[i], sizeof(h));
    return h;
  }

  std::vector<const void*> rows_;
  SharedArena arena_;
};

}  // namespace prefsift
