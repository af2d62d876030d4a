#include "stages/facts.h"

#include <array>

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

uint32_t CountCodePoints(std::string_view s) {
  uint32_t n = 0;
  for (unsigned char c : s) n += (c & 0xC0) != 0x80;
  return n;
}

uint32_t CountWords(std::string_view s) {
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

RecordFacts ComputeFacts(const Record& rec, const NormalizeOptions& norm, MatchText* text) {
  RecordFacts f;
  f.id = rec.id;
  text->prompt = NormalizeForMatch(rec.prompt, norm);
  text->chat = rec.prompt_is_chat;
  text->user_turns = rec.prompt_is_chat ? NormalizeForMatch(rec.UserPromptText(), norm) : std::string();
  f.prompt_hash = HashBytes(text->prompt);
  f.prompt_chars = CountCodePoints(rec.prompt);
  const size_t b = rec.candidates.size();
  text->candidates.resize(b);
  f.cand_hashes.reserve(b);
  f.cand_chars.reserve(b);
  f.cand_words.reserve(b);
  for (size_t i = 0; i < b; ++i) {
    text->candidates[i] = NormalizeForMatch(rec.candidates[i], norm);
    f.cand_hashes.push_back(HashBytes(text->candidates[i]));
    f.cand_chars.push_back(CountCodePoints(rec.candidates[i]));
    f.cand_words.push_back(CountWords(rec.candidates[i]));
  }
  f.ranks = rec.ranks;
  f.chosen = rec.chosen;
  f.shape = rec.shape;
  return f;
}

void InternRecordTexts(const Record& rec, RunState& st, RecordFacts* f) {
  auto id = [&](const std::optional<std::string>& s) { return s ? st.InternText(*s) : 0; };
  f->annotator_id = id(rec.annotator);
  f->thread_id = id(rec.thread);
  f->source_id = id(rec.source);
  f->group_id = id(rec.group);
}

}  // namespace prefsift
