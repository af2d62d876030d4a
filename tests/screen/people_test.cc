// Person names and postal addresses on a generated help-desk corpus with
// decoys (capitalised common words, place names in name-like places,
// product names built on a title, street-like phrases in other senses,
// numbers with units). Fixtures: tests/data/screen/people_<seed>.tsv, made by
// tests/reference/screen_people_corpus.py. Seed 20261221 was used to tune the
// rules in rules/people.json; seed 20261222 (with phrasings and decoys the
// tuning seed lacks) is the reported one. Figures: docs/personal-data.md,
// "Names and postal addresses".
//
// The corpus also plants values written with no signal the screen looks for
// (a bare name in a sentence, a street without city and ZIP), so recall is of
// everything planted, not only of the phrasings the rules were written for.
#include <gtest/gtest.h>

#include <algorithm>
#include <cstdio>
#include <map>
#include <string>
#include <vector>

#include "screen/actions.h"
#include "screen/screener.h"
#include "test_util.h"

namespace prefsift::screen {
namespace {

const char* const kKinds[] = {"person-name", "us-street-address", "uk-postcode-address", "street-address-line"};

struct Planted { std::string kind; size_t b, e; };

std::vector<Planted> ParsePlanted(const std::string& s) {
  std::vector<Planted> out;
  if (s == "-") return out;
  size_t pos = 0;
  while (pos < s.size()) {
    size_t semi = s.find(';', pos);
    if (semi == std::string::npos) semi = s.size();
    std::string one = s.substr(pos, semi - pos);
    size_t colon = one.find(':'), dash = one.find('-', colon);
    out.push_back({one.substr(0, colon), std::stoul(one.substr(colon + 1, dash - colon - 1)),
                   std::stoul(one.substr(dash + 1))});
    pos = semi + 1;
  }
  return out;
}

std::string Unescape(const std::string& s) {
  std::string out;
  for (size_t i = 0; i < s.size(); ++i) {
    if (s[i] == '\\' && i + 1 < s.size() && s[i + 1] == 'n') {
      out.push_back('\n');
      ++i;
    } else {
      out.push_back(s[i]);
    }
  }
  return out;
}

struct KindScore { int planted = 0, found = 0, findings = 0, false_findings = 0; };

std::map<std::string, KindScore> ScorePeople(const std::string& file, int* decoys, int* decoys_touched,
                                             bool verbose) {
  std::map<std::string, KindScore> sc;
  *decoys = *decoys_touched = 0;
  std::map<std::string, int> missed_by_label;
  for (const auto& row : testing::ReadTsv(file)) {
    const std::string text = Unescape(row[2]);
    auto planted = ParsePlanted(row[3]);
    auto fs = testing::AllPacksScreener().Scan(text, FieldKind::kPrompt);
    EXPECT_TRUE(fs.ok());
    bool touched = false;
    for (const Finding& f : fs.value()) {
      if (std::find(std::begin(kKinds), std::end(kKinds), f.kind) == std::end(kKinds)) continue;
      KindScore& k = sc[f.kind];
      ++k.findings;
      bool match = false;
      for (const Planted& p : planted) match |= p.kind == f.kind && f.begin < p.e && p.b < f.end;
      if (!match) {
        ++k.false_findings;
        touched = true;
        if (verbose) {
          std::printf("  false %s [%s] '%s' in: %s\n", f.kind.c_str(), row[1].c_str(),
                      text.substr(f.begin, f.end - f.begin).c_str(), row[2].c_str());
        }
      }
    }
    for (const Planted& p : planted) {
      KindScore& k = sc[p.kind];
      ++k.planted;
      bool hit = false;
      for (const Finding& f : fs.value()) hit |= f.kind == p.kind && f.begin < p.e && p.b < f.end;
      k.found += hit;
      if (!hit) {
        ++missed_by_label[row[1] + " " + p.kind];
        if (verbose && row[1].find("no-signal") == std::string::npos && row[1] != "street-only") {
          std::printf("  missed %s [%s]: %s\n", p.kind.c_str(), row[1].c_str(), row[2].c_str());
        }
      }
    }
    if (row[0] == "decoy") {
      ++*decoys;
      *decoys_touched += touched;
    }
  }
  for (const auto& [label, n] : missed_by_label) std::printf("  missed %3d  %s\n", n, label.c_str());
  for (const char* kind : kKinds) {
    const KindScore& k = sc[kind];
    std::printf("%s %-20s planted %3d found %3d recall %.3f  findings %3d false %3d precision %.3f\n", file.c_str(),
                kind, k.planted, k.found, k.planted ? double(k.found) / k.planted : 1.0, k.findings,
                k.false_findings, k.findings ? 1.0 - double(k.false_findings) / k.findings : 1.0);
  }
  std::printf("%s decoy texts %d, touched %d\n", file.c_str(), *decoys, *decoys_touched);
  return sc;
}

TEST(People, TuningSeed) {
  int decoys = 0, touched = 0;
  auto sc = ScorePeople("people_20261221.tsv", &decoys, &touched, true);
  for (const char* kind : kKinds) {
    EXPECT_GT(sc[kind].found, 0) << kind;
  }
}

TEST(People, ReportSeedNotTunedOn) {
  int decoys = 0, touched = 0;
  auto sc = ScorePeople("people_20261222.tsv", &decoys, &touched, true);
  // Floors set before the report seed was first run; the measured figures are
  // in docs/personal-data.md. Recall counts the unsignalled values too.
  EXPECT_GE(double(sc["person-name"].found) / sc["person-name"].planted, 0.75);
  EXPECT_GE(1.0 - double(sc["person-name"].false_findings) / sc["person-name"].findings, 0.9);
  EXPECT_GE(double(sc["us-street-address"].found) / sc["us-street-address"].planted, 0.75);
  EXPECT_GE(double(sc["uk-postcode-address"].found) / sc["uk-postcode-address"].planted, 0.9);
  EXPECT_GE(1.0 - double(sc["us-street-address"].false_findings) / std::max(1, sc["us-street-address"].findings),
            0.9);
  EXPECT_GE(1.0 - double(sc["uk-postcode-address"].false_findings) / std::max(1, sc["uk-postcode-address"].findings),
            0.9);
  EXPECT_GE(double(sc["street-address-line"].found) / sc["street-address-line"].planted, 0.75);
  EXPECT_GE(1.0 - double(sc["street-address-line"].false_findings) / std::max(1, sc["street-address-line"].findings),
            0.9);
}

TEST(People, PseudonymsAgreeWithinARecord) {
  // The same name twice in one text (and in another text of the record)
  // gets the same keyed pseudonym; a different name a different one. Case
  // and runs of white space do not count (NormaliseForPseudonym).
  auto key = PseudonymKey::FromBytes("people-test-key-0123456789");
  ASSERT_TRUE(key.ok());
  std::string a = "Hi Rosalind Quillfeather,\nthe drill is ready.\nThanks,\nRosalind Quillfeather";
  std::string b = "See you soon.\nKind regards,\nRosalind Quillfeather";
  auto fa = testing::AllPacksScreener().Scan(a, FieldKind::kPrompt).value();
  auto fb = testing::AllPacksScreener().Scan(b, FieldKind::kCandidate).value();
  ASSERT_EQ(fa.size(), 2u);
  ASSERT_EQ(fb.size(), 1u);
  for (auto& f : fa) f.action = Action::kPseudonymise;
  for (auto& f : fb) f.action = Action::kPseudonymise;
  std::string pa = ApplyActions(a, fa, &key.value()), pb = ApplyActions(b, fb, &key.value());
  std::string first = pa.substr(pa.find("[[pseudo:person-name:"), 35);
  EXPECT_NE(pa.find(first, pa.find(first) + 1), std::string::npos) << pa;  // twice in a
  EXPECT_NE(pb.find(first), std::string::npos) << pb;                       // and in b
  EXPECT_EQ(pa.find("Rosalind"), std::string::npos);
  EXPECT_EQ(Pseudonym("person-name", "Rosalind  QUILLFEATHER", key.value()), first);
  std::string c = "Dear Rosalind Ashcombe,\nhello.";
  auto fc = testing::AllPacksScreener().Scan(c, FieldKind::kPrompt).value();
  ASSERT_EQ(fc.size(), 1u);
  fc[0].action = Action::kPseudonymise;
  EXPECT_EQ(ApplyActions(c, fc, &key.value()).find(first), std::string::npos);
}

}  // namespace
}  // namespace prefsift::screen
