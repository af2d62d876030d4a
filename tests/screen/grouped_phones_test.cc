// National numbers in their standard grouping with no phone word nearby,
// among decoys (order numbers, dates, times, version strings, measurements,
// invoice and ticket references). Fixtures: tests/data/screen/grouped_phones_<seed>.tsv,
// made by tests/reference/screen_grouped_phones.py, which also records the
// spans python3-phonenumbers' PhoneNumberMatcher (regions GB, DE, leniency
// VALID) finds in each text.
//
// Seed 20261211 was used to tune the rules; seed 20261212 (with phrasings
// and decoys the tuning seed does not have) is the reported one.
// Figures: docs/personal-data.md, "Numbers in a standard grouping".
#include <gtest/gtest.h>

#include <cstdio>
#include <string>
#include <vector>

#include "screen/screener.h"
#include "test_util.h"

namespace prefsift::screen {
namespace {

struct Span { size_t b, e; };

std::vector<Span> Spans(const std::string& s) {
  std::vector<Span> out;
  if (s == "-") return out;
  size_t pos = 0;
  while (pos < s.size()) {
    size_t comma = s.find(',', pos);
    if (comma == std::string::npos) comma = s.size();
    std::string one = s.substr(pos, comma - pos);
    size_t dash = one.find('-');
    out.push_back({std::stoul(one.substr(0, dash)), std::stoul(one.substr(dash + 1))});
    pos = comma + 1;
  }
  return out;
}

bool IsPhone(const Finding& f) { return f.kind.rfind("phone-", 0) == 0; }

struct Score {
  int planted = 0, found = 0, exact = 0;
  int matcher_found = 0, matcher_and_us = 0;
  int decoys = 0, decoys_hit = 0, findings = 0, false_findings = 0;
};

Score ScoreFile(const std::string& file, bool verbose) {
  Score s;
  for (const auto& row : testing::ReadTsv(file)) {
    const std::string& role = row[0];
    const std::string& text = row[2];
    auto fs = testing::AllPacksScreener().Scan(text, FieldKind::kPrompt);
    EXPECT_TRUE(fs.ok());
    std::vector<Finding> phones;
    for (const auto& f : fs.value()) {
      if (IsPhone(f)) phones.push_back(f);
    }
    s.findings += static_cast<int>(phones.size());
    if (role == "planted") {
      Span p = Spans(row[3]).at(0);
      ++s.planted;
      bool hit = false, exact = false;
      for (const auto& f : phones) {
        if (f.begin < p.e && p.b < f.end) {
          hit = true;
          exact |= f.begin == p.b && f.end == p.e;
        } else {
          ++s.false_findings;
        }
      }
      s.found += hit;
      s.exact += exact;
      bool matcher = false;
      for (const Span& m : Spans(row[4])) matcher |= m.b < p.e && p.b < m.e;
      s.matcher_found += matcher;
      s.matcher_and_us += matcher && hit;
      if (!hit && verbose) std::printf("  missed [%s] %s\n", row[1].c_str(), text.c_str());
    } else {
      ++s.decoys;
      s.decoys_hit += !phones.empty();
      s.false_findings += static_cast<int>(phones.size());
      if (!phones.empty() && verbose) std::printf("  decoy hit [%s] %s\n", row[1].c_str(), text.c_str());
    }
  }
  std::printf("%s: planted %d, found %d (recall %.3f; exact span %d), phonenumbers matcher found %d of them, "
              "we found %d of those (recall vs matcher %.3f); decoy texts %d, touched %d; phone findings %d, "
              "false %d (precision %.3f)\n",
              file.c_str(), s.planted, s.found, double(s.found) / s.planted, s.exact, s.matcher_found,
              s.matcher_and_us, double(s.matcher_and_us) / s.matcher_found, s.decoys, s.decoys_hit, s.findings,
              s.false_findings, s.findings ? 1.0 - double(s.false_findings) / s.findings : 1.0);
  return s;
}

TEST(GroupedPhones, TuningSeed) {
  Score s = ScoreFile("grouped_phones_20261211.tsv", true);
  EXPECT_EQ(s.found, s.planted);
  EXPECT_EQ(s.decoys_hit, 0);
}

TEST(GroupedPhones, ReportSeedNotTunedOn) {
  Score s = ScoreFile("grouped_phones_20261212.tsv", true);
  // Gates set before the report seed was first run (common practice for a
  // screen: recall >= 0.98, at most 1% of decoy texts touched).
  EXPECT_GE(double(s.found) / s.planted, 0.98);
  EXPECT_GE(double(s.matcher_and_us) / s.matcher_found, 0.98);
  EXPECT_LE(double(s.decoys_hit) / s.decoys, 0.01);
}

}  // namespace
}  // namespace prefsift::screen
