#include "stages/facts.h"

namespace prefsift {

uint32_t CountCodePoints(std::string_view s) {
  uint32_t n = 0;
  for (unsigned char c : s) n += (c & 0xC0) != 0x80;
  return n;
}

uint32_t CountWords(std::string_view s) {
  uint32_t n = 0;
  bool in_word = false;
  for (size_t i = 0; i < s.size(); ++i) {
    unsigned char c = static_cast<unsigned char>(s[i]);
    bool space = c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f';
    if (c == 0xE3 && i + 2 < s.size() && static_cast<unsigned char>(s[i + 1]) == 0x80 &&
        static_cast<unsigned char>(s[i + 2]) == 0x80) {  // U+3000 ideographic space
      space = true;
      i += 2;
    }
    if (!space && !in_word) ++n;
    in_word = !space;
  }
  return n;
}

RecordFacts ComputeFacts(const Record& rec, const NormalizeOptions& norm) {
  RecordFacts f;
  f.id = rec.id;
  f.prompt_hash = HashBytes(NormalizeForMatch(rec.prompt, norm));
  f.prompt_chars = CountCodePoints(rec.prompt);
  f.cand_hashes.reserve(rec.candidates.size());
  for (const auto& c : rec.candidates) {
    f.cand_hashes.push_back(HashBytes(NormalizeForMatch(c, norm)));
    f.cand_chars.push_back(CountCodePoints(c));
    f.cand_words.push_back(CountWords(c));
  }
  f.ranks = rec.ranks;
  f.chosen = rec.chosen;
  f.shape = rec.shape;
  f.annotator = rec.annotator.value_or("");
  f.thread = rec.thread.value_or("");
  f.source = rec.source.value_or("");
  f.group = rec.group.value_or("");
  return f;
}

}  // namespace prefsift
