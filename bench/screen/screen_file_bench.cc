// Where the personal-data screen's time goes on a real JSONL file, single thread.
//
// Reads the "prompt" (a string) and "candidates" (strings) of the first
// max_records records of a JSONL file and scans them with every pack of the
// rules folder (the pipeline stage's default), then prints CPU seconds (this
// thread's) for:
//   set      an RE2::Set of the same shapes alone (the prefilter pass);
//   scan     Screener::Scan, the whole screen;
//   each     Screener::ScanEachRule, the per-rule reference (optional);
// how many texts the set reports how many rules for, and per rule: texts the
// set reports it in, matches, and the CPU time of re-running the rule with
// group extraction where the set reported it. The findings' checksum (rule,
// field, span, action, certainty, kind, preview and order) lets two builds be
// compared: it must not change when only the speed does.
//
// Usage: screen_file_bench file.jsonl [max_records=0 (all)] [reps=3] [each=0]
#include <algorithm>
#include <cinttypes>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <fstream>
#include <map>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>
#include <re2/re2.h>
#include <re2/set.h>

#include "io/file_system.h"
#include "screen/rules.h"
#include "screen/screener.h"

namespace {

using prefsift::screen::FieldKind;
using prefsift::screen::Finding;
using prefsift::screen::RuleSet;
using prefsift::screen::Screener;

struct Text {
  std::string s;
  FieldKind field;
};

double CpuSeconds() {
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + ts.tv_nsec * 1e-9;
}

uint64_t Mix(uint64_t h, const void* p, size_t n) {  // FNV-1a 64
  const auto* b = static_cast<const unsigned char*>(p);
  for (size_t i = 0; i < n; ++i) h = (h ^ b[i]) * 0x100000001B3ull;
  return h;
}

uint64_t MixFinding(uint64_t h, const Finding& f) {
  h = Mix(h, f.rule_id.data(), f.rule_id.size());
  uint64_t v[4] = {static_cast<uint64_t>(f.field), f.begin, f.end, static_cast<uint64_t>(f.action)};
  h = Mix(h, v, sizeof v);
  h = Mix(h, &f.certainty, sizeof f.certainty);
  h = Mix(h, f.kind.data(), f.kind.size());
  return Mix(h, f.preview.data(), f.preview.size());
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s file.jsonl [max_records=0] [reps=3] [each=0]\n", argv[0]);
    return 2;
  }
  const size_t max_records = argc > 2 ? static_cast<size_t>(std::atol(argv[2])) : 0;
  const int reps = argc > 3 ? std::atoi(argv[3]) : 3;
  const bool each = argc > 4 && std::atoi(argv[4]) != 0;

  std::vector<Text> texts;
  size_t bytes = 0, records = 0;
  {
    std::ifstream in(argv[1]);
    std::string line;
    while (std::getline(in, line) && (max_records == 0 || records < max_records)) {
      auto j = nlohmann::json::parse(line, nullptr, false);
      if (j.is_discarded() || !j.is_object()) continue;
      ++records;
      if (auto p = j.find("prompt"); p != j.end() && p->is_string()) {
        texts.push_back({p->get<std::string>(), FieldKind::kPrompt});
      }
      if (auto c = j.find("candidates"); c != j.end() && c->is_array()) {
        for (const auto& x : *c) {
          if (x.is_string()) texts.push_back({x.get<std::string>(), FieldKind::kCandidate});
        }
      }
    }
  }
  for (const Text& t : texts) bytes += t.s.size();
  std::printf("records=%zu texts=%zu bytes=%zu\n", records, texts.size(), bytes);

  // Every pack of the rules folder, in name order, as the stage loads them.
  std::vector<std::string> packs;
  auto names = prefsift::DefaultFileSystem()->List(PREFSIFT_RULES_DIR);
  if (!names.ok()) return 1;
  for (const std::string& n : names.value()) {
    if (n.size() > 5 && n.compare(n.size() - 5, 5, ".json") == 0) packs.push_back(n.substr(0, n.size() - 5));
  }
  std::sort(packs.begin(), packs.end());
  auto rules = prefsift::screen::LoadRulePacks(prefsift::DefaultFileSystem(), packs, PREFSIFT_RULES_DIR);
  if (!rules.ok()) {
    std::fprintf(stderr, "%s\n", rules.status().message().c_str());
    return 1;
  }
  const RuleSet& rs = rules.value();
  auto built = Screener::Build(rs);
  if (!built.ok()) {
    std::fprintf(stderr, "%s\n", built.status().message().c_str());
    return 1;
  }
  const Screener& screener = built.value();

  // The same prefilter as the screener's (all default rules screen every field kind).
  RE2::Options so;
  so.set_log_errors(false);
  so.set_max_mem(64 << 20);
  RE2::Set set(so, RE2::UNANCHORED);
  RE2::Set set_no_beside(so, RE2::UNANCHORED);  // rules with "beside" left out
  std::vector<std::unique_ptr<RE2>> res;
  RE2::Options ro;
  ro.set_log_errors(false);
  ro.set_max_mem(8 << 20);
  for (const auto& r : rs.rules) {
    set.Add(r.shape, nullptr);
    if (r.beside.empty()) set_no_beside.Add(r.shape, nullptr);
    res.push_back(std::make_unique<RE2>(r.shape, ro));
  }
  set.Compile();
  set_no_beside.Compile();

  double best_set = 1e9, best_set_nb = 1e9, best_scan = 1e9, best_each = 1e9;
  uint64_t sum_scan = 0, sum_each = 0;
  size_t findings = 0;
  std::vector<int> hits;
  for (int rep = 0; rep < reps; ++rep) {
    double c0 = CpuSeconds();
    size_t any = 0;
    for (const Text& t : texts) {
      hits.clear();
      any += set.Match(t.s, &hits) ? 1 : 0;
    }
    best_set = std::min(best_set, CpuSeconds() - c0);
    c0 = CpuSeconds();
    for (const Text& t : texts) {
      hits.clear();
      any += set_no_beside.Match(t.s, &hits) ? 1 : 0;
    }
    best_set_nb = std::min(best_set_nb, CpuSeconds() - c0);
    c0 = CpuSeconds();
    uint64_t h = 0xCBF29CE484222325ull;
    findings = 0;
    for (const Text& t : texts) {
      auto r = screener.Scan(t.s, t.field);
      if (!r.ok()) {
        std::fprintf(stderr, "scan failed: %s\n", r.status().message().c_str());
        return 1;
      }
      for (const Finding& f : r.value()) h = MixFinding(h, f);
      h = Mix(h, "|", 1);
      findings += r.value().size();
    }
    best_scan = std::min(best_scan, CpuSeconds() - c0);
    sum_scan = h;
    if (each) {
      c0 = CpuSeconds();
      h = 0xCBF29CE484222325ull;
      for (const Text& t : texts) {
        for (const Finding& f : screener.ScanEachRule(t.s, t.field)) h = MixFinding(h, f);
        h = Mix(h, "|", 1);
      }
      best_each = std::min(best_each, CpuSeconds() - c0);
      sum_each = h;
    }
  }
  std::printf("set   cpu %7.3f s  %7.1f MB/s\n", best_set, bytes / best_set / 1e6);
  std::printf("set-b cpu %7.3f s  %7.1f MB/s  (without rules with \"beside\")\n", best_set_nb,
              bytes / best_set_nb / 1e6);
  std::printf("scan  cpu %7.3f s  %7.1f MB/s  findings=%zu checksum=%016" PRIx64 "\n", best_scan,
              bytes / best_scan / 1e6, findings, sum_scan);
  if (each) {
    std::printf("each  cpu %7.3f s  %7.1f MB/s  checksum=%016" PRIx64 " %s\n", best_each, bytes / best_each / 1e6,
                sum_each, sum_each == sum_scan ? "(same)" : "(DIFFERENT)");
  }

  // Per rule: where the set reports it, the rule's own re-scan with groups.
  std::map<size_t, size_t> by_count;
  std::vector<size_t> reported(rs.rules.size()), matches(rs.rules.size());
  std::vector<double> cpu(rs.rules.size()), cpu_bare(rs.rules.size());
  for (const Text& t : texts) {
    hits.clear();
    set.Match(t.s, &hits);
    ++by_count[hits.size()];
    for (int ri : hits) {
      const RE2& re = *res[static_cast<size_t>(ri)];
      const int nsub = re.NumberOfCapturingGroups() >= 1 ? 2 : 1;
      re2::StringPiece m[2];
      ++reported[static_cast<size_t>(ri)];
      double c0 = CpuSeconds();
      size_t pos = 0, n = 0;
      while (pos <= t.s.size() && re.Match(t.s, pos, t.s.size(), RE2::UNANCHORED, m, nsub)) {
        size_t b = static_cast<size_t>(m[0].data() - t.s.data());
        size_t e = b + m[0].size();
        pos = e == b ? b + 1 : e;
        ++n;
      }
      double c1 = CpuSeconds();
      // The same loop finding only where each match ends (no groups, no start).
      pos = 0;
      while (pos <= t.s.size() && re.Match(t.s, pos, t.s.size(), RE2::UNANCHORED, m, 1)) {
        size_t b = static_cast<size_t>(m[0].data() - t.s.data());
        size_t e = b + m[0].size();
        pos = e == b ? b + 1 : e;
      }
      cpu_bare[static_cast<size_t>(ri)] += CpuSeconds() - c1;
      cpu[static_cast<size_t>(ri)] += c1 - c0;
      matches[static_cast<size_t>(ri)] += n;
    }
  }
  std::printf("rules reported per text:");
  for (auto [k, v] : by_count) std::printf(" %zu:%zu", k, v);
  std::printf("\n%-50s %9s %9s %9s %9s\n", "rule", "texts", "matches", "cpu-s", "cpu-s m0");
  double total = 0;
  for (size_t i = 0; i < rs.rules.size(); ++i) {
    total += cpu[i];
    if (reported[i] == 0) continue;
    std::printf("%-50s %9zu %9zu %9.3f %9.3f\n", rs.rules[i].id.c_str(), reported[i], matches[i], cpu[i],
                cpu_bare[i]);
  }
  std::printf("re-scans in all: %.3f cpu-s\n", total);
  return 0;
}
