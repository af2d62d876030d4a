#include "stages/screen/hit_rows.h"

#include <cstring>
#include <type_traits>

namespace prefsift {
namespace {

// A hit's fixed fields as stored: 40 bytes, then its strings' lengths say
// where its meta pointer and preview sit in the row's character part.
struct PackedHit {
  uint64_t text_hash;
  uint32_t index, rule, begin, end;
  float confidence;
  uint32_t meta_len, preview_len;
  uint8_t part, action;
};
static_assert(std::is_trivially_copyable_v<PackedHit>);

// A row: header (8 bytes), the packed hits, then the characters.
constexpr size_t kHeaderBytes = 8;

}  // namespace

void HitRows::clear() {
  std::vector<const void*>().swap(rows_);
  arena_.clear();
}

void HitRows::Set(size_t i, const RecordHits& r) {
  size_t chars = 0;
  for (const Hit& h : r.hits) chars += h.meta_pointer.size() + h.preview.size();
  const size_t bytes = kHeaderBytes + r.hits.size() * sizeof(PackedHit) + chars;
  auto* at = static_cast<unsigned char*>(arena_.Allocate(bytes));
  RowHeader head{static_cast<uint32_t>(r.hits.size()),
                 static_cast<uint8_t>((r.drop ? kDrop : 0) | (r.rewrite ? kRewrite : 0))};
  std::memcpy(at, &head, sizeof(head));
  unsigned char* packed = at + kHeaderBytes;
  unsigned char* text = packed + r.hits.size() * sizeof(PackedHit);
  for (const Hit& h : r.hits) {
    PackedHit p{h.text_hash, h.index, h.rule, h.begin, h.end, h.confidence,
                static_cast<uint32_t>(h.meta_pointer.size()), static_cast<uint32_t>(h.preview.size()),
                static_cast<uint8_t>(h.part), static_cast<uint8_t>(h.action)};
    std::memcpy(packed, &p, sizeof(p));
    packed += sizeof(p);
    std::memcpy(text, h.meta_pointer.data(), h.meta_pointer.size());
    text += h.meta_pointer.size();
    std::memcpy(text, h.preview.data(), h.preview.size());
    text += h.preview.size();
  }
  rows_[i] = at;
}

RecordHits HitRows::Get(size_t i) const {
  RecordHits r;
  if (!rows_[i]) return r;
  const RowHeader head = Header(i);
  r.drop = (head.flags & kDrop) != 0;
  r.rewrite = (head.flags & kRewrite) != 0;
  r.hits.resize(head.count);
  const auto* packed = static_cast<const unsigned char*>(rows_[i]) + kHeaderBytes;
  const char* text = reinterpret_cast<const char*>(packed + head.count * sizeof(PackedHit));
  for (Hit& h : r.hits) {
    PackedHit p;
    std::memcpy(&p, packed, sizeof(p));
    packed += sizeof(p);
    h.part = static_cast<HitPart>(p.part);
    h.action = static_cast<screen::Action>(p.action);
    h.index = p.index;
    h.rule = p.rule;
    h.begin = p.begin;
    h.end = p.end;
    h.confidence = p.confidence;
    h.text_hash = p.text_hash;
    h.meta_pointer.assign(text, p.meta_len);
    text += p.meta_len;
    h.preview.assign(text, p.preview_len);
    text += p.preview_len;
  }
  return r;
}

}  // namespace prefsift
