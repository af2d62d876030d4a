// Surface text features; see surface_features.h. Pure, thread-safe.
#include "stats/surface_features.h"

#include <cstddef>
#include <string>

namespace prefsift::stats {
namespace {

// English only. Lower case; matched against the lower-cased (ASCII) text with
// U+2019 folded to "'". Our own list of common refusal/apology openings.
constexpr const char* kRefusalPhrases[] = {
    "i'm sorry",
    "i am sorry",
    "i apologize",
    "i apologise",
    "my apologies",
    "i cannot",
    "i can't help",
    "i can't assist",
    "i can't provide",
    "i can't do that",
    "i'm unable to",
    "i am unable to",
    "i'm not able to",
    "i am not able to",
    "i won't be able to",
    "as an ai",
    "as a language model",
};

bool IsSpace(char c) {
  return c == ' ' || c == '\t' || c == '\n' || c == '\v' || c == '\f' || c == '\r';
}
bool IsAlnum(char c) {
  return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
}
char Lower(char c) { return (c >= 'A' && c <= 'Z') ? static_cast<char>(c - 'A' + 'a') : c; }

bool IsBlank(std::string_view line) {
  for (char c : line)
    if (c != ' ' && c != '\t') return false;
  return true;
}

// Leading spaces (tab = 4) and the rest of the line.
size_t Indent(std::string_view line, size_t* pos) {
  size_t width = 0, i = 0;
  while (i < line.size() && (line[i] == ' ' || line[i] == '\t')) {
    width += line[i] == '\t' ? 4 : 1;
    ++i;
  }
  *pos = i;
  return width;
}

bool IsListItem(std::string_view line) {
  size_t i;
  Indent(line, &i);
  if (i >= line.size()) return false;
  size_t after;
  const char c = line[i];
  if (c == '-' || c == '*' || c == '+') {
    after = i + 1;
  } else {
    size_t j = i;
    while (j < line.size() && j - i < 9 && line[j] >= '0' && line[j] <= '9') ++j;
    if (j == i || j >= line.size() || (line[j] != '.' && line[j] != ')')) return false;
    after = j + 1;
  }
  return after < line.size() && (line[after] == ' ' || line[after] == '\t');
}

bool IsHeading(std::string_view line) {
  size_t i = 0;
  while (i < line.size() && i < 3 && line[i] == ' ') ++i;
  size_t hashes = 0;
  while (i < line.size() && line[i] == '#') {
    ++hashes;
    ++i;
  }
  if (hashes < 1 || hashes > 6) return false;
  return i == line.size() || line[i] == ' ' || line[i] == '\t';
}

bool IsFence(std::string_view line) {
  size_t i = 0;
  while (i < line.size() && i < 3 && line[i] == ' ') ++i;
  if (i + 3 > line.size()) return false;
  const char c = line[i];
  return (c == '`' || c == '~') && line[i + 1] == c && line[i + 2] == c;
}

std::string FoldForMatching(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (size_t i = 0; i < text.size(); ++i) {
    // U+2019 RIGHT SINGLE QUOTATION MARK = E2 80 99.
    if (i + 2 < text.size() && static_cast<unsigned char>(text[i]) == 0xE2 &&
        static_cast<unsigned char>(text[i + 1]) == 0x80 &&
        static_cast<unsigned char>(text[i + 2]) == 0x99) {
      out.push_back('\'');
      i += 2;
      continue;
    }
    out.push_back(Lower(text[i]));
  }
  return out;
}

bool HasUrl(const std::string& folded) {
  if (folded.find("http://") != std::string::npos) return true;
  if (folded.find("https://") != std::string::npos) return true;
  for (size_t pos = folded.find("www."); pos != std::string::npos;
       pos = folded.find("www.", pos + 1)) {
    const bool word_start = pos == 0 || !IsAlnum(folded[pos - 1]);
    const bool followed = pos + 4 < folded.size() && IsAlnum(folded[pos + 4]);
    if (word_start && followed) return true;
  }
  return false;
}

}  // namespace

std::span<const char* const> RefusalPhrases() { return kRefusalPhrases; }

SurfaceFeatures ComputeSurfaceFeatures(std::string_view text) {
  SurfaceFeatures f;
  bool in_word = false;
  for (char c : text) {
    const unsigned char u = static_cast<unsigned char>(c);
    if ((u & 0xC0) != 0x80) ++f.code_points;
    if (IsSpace(c)) {
      in_word = false;
    } else if (!in_word) {
      in_word = true;
      ++f.words;
    }
  }
  // Line scan.
  bool previous_blank = true;  // the start of text counts as after a blank line
  bool in_list = false;        // the last non-blank line was a list item or its continuation
  size_t start = 0;
  while (start <= text.size()) {
    size_t end = text.find('\n', start);
    if (end == std::string_view::npos) end = text.size();
    std::string_view line = text.substr(start, end - start);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if (IsBlank(line)) {
      previous_blank = true;
    } else {
      size_t pos;
      const size_t indent = Indent(line, &pos);
      const bool list_item = IsListItem(line);
      if (list_item) ++f.list_items;
      if (IsHeading(line)) f.has_heading = true;
      if (IsFence(line)) f.has_code_block = true;
      if (indent >= 4 && previous_blank && !in_list && !list_item) f.has_code_block = true;
      if (list_item) {
        in_list = true;
      } else if (indent == 0) {
        in_list = false;
      }
      previous_blank = false;
    }
    if (end == text.size()) break;
    start = end + 1;
  }
  const std::string folded = FoldForMatching(text);
  for (const char* phrase : kRefusalPhrases) {
    if (folded.find(phrase) != std::string::npos) {
      f.has_refusal = true;
      break;
    }
  }
  f.has_url = HasUrl(folded);
  return f;
}

}  // namespace prefsift::stats
