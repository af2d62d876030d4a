#include "stages/annotators/annotator_time.h"

#include <cmath>
#include <cstdint>

namespace prefsift {
namespace {

bool Digits(std::string_view s, size_t at, size_t n, int* out) {
  if (at + n > s.size()) return false;
  int v = 0;
  for (size_t i = at; i < at + n; ++i) {
    if (s[i] < '0' || s[i] > '9') return false;
    v = v * 10 + (s[i] - '0');
  }
  *out = v;
  return true;
}

// Days from 1970-01-01 to y-m-d in the proleptic Gregorian calendar
// (H. Hinnant's days_from_civil algorithm, from memory).
int64_t DaysFromCivil(int64_t y, unsigned m, unsigned d) {
  y -= m <= 2;
  const int64_t era = (y >= 0 ? y : y - 399) / 400;
  const unsigned yoe = static_cast<unsigned>(y - era * 400);
  const unsigned doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  const unsigned doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + static_cast<int64_t>(doe) - 719468;
}

bool Leap(int y) { return (y % 4 == 0 && y % 100 != 0) || y % 400 == 0; }

std::optional<double> ParseNumber(std::string_view s) {
  double v = 0;
  size_t i = 0;
  bool any = false;
  for (; i < s.size() && s[i] >= '0' && s[i] <= '9'; ++i) {
    v = v * 10 + (s[i] - '0');
    any = true;
  }
  if (i < s.size() && s[i] == '.') {
    double scale = 0.1;
    for (++i; i < s.size() && s[i] >= '0' && s[i] <= '9'; ++i, scale /= 10) {
      v += (s[i] - '0') * scale;
      any = true;
    }
  }
  if (!any || i != s.size()) return std::nullopt;
  return v;
}

}  // namespace

std::optional<double> ParseJudgmentTime(std::string_view s) {
  if (s.empty()) return std::nullopt;
  if (s.size() < 10 || s[4] != '-') return ParseNumber(s);
  int y, mo, d, h = 0, mi = 0, sec = 0;
  if (!Digits(s, 0, 4, &y) || s[4] != '-' || !Digits(s, 5, 2, &mo) || s.size() < 10 || s[7] != '-' ||
      !Digits(s, 8, 2, &d)) {
    return std::nullopt;
  }
  static const int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  if (mo < 1 || mo > 12 || d < 1 || d > kDays[mo - 1] + (mo == 2 && Leap(y) ? 1 : 0)) return std::nullopt;
  size_t i = 10;
  double frac = 0;
  if (i < s.size()) {
    if (s[i] != 'T' && s[i] != 't' && s[i] != ' ') return std::nullopt;
    if (!Digits(s, i + 1, 2, &h) || i + 3 >= s.size() || s[i + 3] != ':' || !Digits(s, i + 4, 2, &mi)) {
      return std::nullopt;
    }
    i += 6;
    if (i < s.size() && s[i] == ':') {
      if (!Digits(s, i + 1, 2, &sec)) return std::nullopt;
      i += 3;
      if (i < s.size() && (s[i] == '.' || s[i] == ',')) {
        double scale = 0.1;
        size_t j = i + 1;
        for (; j < s.size() && s[j] >= '0' && s[j] <= '9'; ++j, scale /= 10) frac += (s[j] - '0') * scale;
        if (j == i + 1) return std::nullopt;
        i = j;
      }
    }
    if (h > 23 || mi > 59 || sec > 60) return std::nullopt;
  }
  int offset = 0;
  if (i < s.size()) {
    if ((s[i] == 'Z' || s[i] == 'z') && i + 1 == s.size()) {
      i = s.size();
    } else if ((s[i] == '+' || s[i] == '-') && s.size() == i + 6 && s[i + 3] == ':') {
      int oh, om;
      if (!Digits(s, i + 1, 2, &oh) || !Digits(s, i + 4, 2, &om) || oh > 23 || om > 59) return std::nullopt;
      offset = (s[i] == '+' ? 1 : -1) * (oh * 3600 + om * 60);
      i = s.size();
    } else {
      return std::nullopt;
    }
  }
  const double days = static_cast<double>(DaysFromCivil(y, static_cast<unsigned>(mo), static_cast<unsigned>(d)));
  return days * 86400.0 + h * 3600.0 + mi * 60.0 + sec + frac - offset;
}

}  // namespace prefsift
