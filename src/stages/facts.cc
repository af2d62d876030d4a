#include "stages/facts.h"

#include <array>

#include "core/byte_block.h"

namespace prefsift {
namespace {

// ASCII white space, as a byte table for the word counter.
constexpr uint8_t kSpace = 1;
constexpr std::array<uint8_t, 256> MakeClasses() {
  std::array<uint8_t, 256> t{};
  for (int c : {' ', '\t', '\n', '\r', '\v', '\f'}) t[static_cast<size_t>(c)] = kSpace;
  return t;
}
constexpr std::array<uint8_t, 256> kClass = MakeClasses();

}  // namespace

uint32_t CountCodePointsReference(std::string_view s) {
  uint32_t n = 0;
  for (unsigned char c : s) n += (c & 0xC0) != 0x80;
  return n;
}

uint32_t CountWordsReference(std::string_view s) {
  uint32_t n = 0;
  bool in_word = false;
  const auto* p = reinterpret_cast<const unsigned char*>(s.data());
  const size_t size = s.size();
  for (size_t i = 0; i < size; ++i) {
    const unsigned char c = p[i];
    bool space = kClass[c] == kSpace;
    if (c == 0xE3 && i + 2 < size && p[i + 1] == 0x80 && p[i + 2] == 0x80) {  // U+3000 ideographic space
      space = true;
      i += 2;
    }
    n += !space && !in_word;
    in_word = !space;
  }
  return n;
}

// The counts by 64-byte masks (core/byte_block.h).
uint32_t CountCodePoints(std::string_view s) {
  uint64_t n = 0;
  ForEachBlock64(s, 0, [&](const unsigned char* p, size_t, uint64_t valid) {
    n += static_cast<uint64_t>(PopCount64(valid & ~Block64(p).InRange(0x80, 0xBF)));
  });
  return static_cast<uint32_t>(n);  // modulo 2^32, as the reference's counter
}

// A word starts at a byte that is not white space after one that is (or at
// the start). U+3000 (E3 80 80, always whole: E3 is never inside another)
// makes its three bytes white space; the two after a block's last bytes
// carry into the next block.
uint32_t CountWords(std::string_view s) {
  uint64_t n = 0;
  uint64_t space_before = 1;  // bit 0: the byte before the block is white space (or the text starts)
  uint64_t carried = 0;       // bytes of a U+3000 begun in the previous block
  ForEachBlock64(s, 2, [&](const unsigned char* p, size_t, uint64_t valid) {
    const Block64 b(p);
    // E3 80 80 starting here; past the end the bytes read are 0, so a
    // U+3000 is only found whole inside the text.
    const uint64_t ideo = b.Eq(0xE3) & Block64(p + 1).Eq(0x80) & Block64(p + 2).Eq(0x80);
    const uint64_t space = b.Eq(' ') | b.InRange('\t', '\r') | ideo | ideo << 1 | ideo << 2 | carried;
    carried = ideo >> 63 | ideo >> 62;
    n += static_cast<uint64_t>(PopCount64(valid & ~space & (space << 1 | space_before)));
    space_before = space >> 63;
  });
  return static_cast<uint32_t>(n);
}

RecordFacts ComputeFacts(const Record& rec, const NormalizeOptions& norm, MatchText* text,
                         std::vector<CandidateFacts>* cands) {
  RecordFacts f;
  f.id = rec.id;
  NormalizeForMatchInto(rec.prompt, norm, &text->prompt);
  text->chat = rec.prompt_is_chat;
  if (rec.prompt_is_chat) {
    NormalizeForMatchInto(rec.UserPromptText(), norm, &text->user_turns);
  } else {
    text->user_turns.clear();
  }
  f.prompt_hash = HashBytes(text->prompt);
  f.prompt_chars = CountCodePoints(rec.prompt);
  const size_t b = rec.candidates.size();
  text->candidates.resize(b);
  cands->resize(b);
  for (size_t i = 0; i < b; ++i) {
    NormalizeForMatchInto(rec.candidates[i], norm, &text->candidates[i]);
    CandidateFacts& c = (*cands)[i];
    c.hash = HashBytes(text->candidates[i]);
    c.chars = CountCodePoints(rec.candidates[i]);
    c.words = CountWords(rec.candidates[i]);
    c.rank = i < rec.ranks.size() ? rec.ranks[i] : 0;
  }
  f.cands = *cands;
  f.chosen = rec.chosen;
  f.shape = rec.shape;
  return f;
}

void KeepRecordFacts(const Record& rec, RunState& st, RecordFacts* f) {
  f->cands = st.KeepCandidates(f->cands);
  auto id = [&](const std::optional<std::string>& s) { return s ? st.InternText(*s) : 0; };
  f->annotator_id = id(rec.annotator);
  f->thread_id = id(rec.thread);
  f->source_id = id(rec.source);
  f->group_id = id(rec.group);
}

}  // namespace prefsift
