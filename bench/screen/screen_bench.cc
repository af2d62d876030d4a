// Throughput of the personal-data screen, single thread.
//
// Generates deterministic English-like texts (seeded) of 200-2000 bytes with
// realistic contents: ordinary numbers (years, prices, versions, times) in
// most texts and a personal-data item (fictional: RFC 2606 domains, RFC 5737
// addresses, Ofcom drama numbers, test cards) in about 1 text in 10. Scans
// them with all packs, with each pack alone, and with the first 1 and 5
// rules, and prints MB/s (MB = 10^6 bytes), best of 3 runs, both by this
// thread's CPU time and by wall-clock time (they differ when the machine is
// shared: wall time then includes time spent waiting for a core).
//
// Usage: screen_bench [total_megabytes=40]
#include <algorithm>
#include <chrono>
#include <ctime>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "io/file_system.h"
#include "screen/rules.h"
#include "screen/screener.h"

namespace {

using prefsift::screen::FieldKind;
using prefsift::screen::LoadRulePacks;
using prefsift::screen::RuleSet;
using prefsift::screen::Screener;

struct Rng {
  uint64_t s = 0x9E3779B97F4A7C15ull;
  uint64_t Next() {  // splitmix64
    uint64_t z = (s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
  }
  size_t Below(size_t n) { return static_cast<size_t>(Next() % n); }
};

const char* kWords[] = {
    "the", "of", "and", "to", "a", "in", "is", "that", "for", "it", "as", "was", "with", "be", "by", "on",
    "not", "he", "this", "are", "or", "his", "from", "at", "which", "but", "have", "an", "they", "you",
    "were", "their", "one", "all", "we", "can", "her", "has", "there", "been", "if", "more", "when", "will",
    "would", "who", "so", "no", "model", "answer", "question", "because", "example", "function", "return",
    "value", "people", "should", "first", "better", "response", "explain", "however", "therefore", "data",
    "number", "system", "different", "important", "following", "information", "results", "between", "using"};
const char* kNumbers[] = {"in 2019", "costs $12.50", "version 3.4.1", "at 10:30", "about 45%", "page 17",
                          "chapter 4", "1,250 units", "from 1990 to 2005", "step 2", "x = 3.14159"};
const char* kHits[] = {"write to jane.doe@example.com", "call 020 7946 0123", "ring +44 7700 900123",
                       "card 4111 1111 1111 1111", "server 192.0.2.44", "IBAN GB82 WEST 1234 5698 7654 32",
                       "use 2001:db8::7334 here", "SSN 123-45-6789", "phone (201) 555-0123",
                       "mail info@example.org"};

std::vector<std::string> MakeTexts(size_t total_bytes, size_t* hits) {
  Rng r;
  std::vector<std::string> out;
  size_t bytes = 0;
  *hits = 0;
  while (bytes < total_bytes) {
    size_t len = 200 + r.Below(1800);
    std::string t;
    bool hit = r.Below(10) == 0;
    size_t hit_at = hit ? r.Below(len) : len + 1;
    while (t.size() < len) {
      if (t.size() >= hit_at) {
        t += kHits[r.Below(std::size(kHits))];
        hit_at = len + 1;
        ++*hits;
      } else if (r.Below(25) == 0) {
        t += kNumbers[r.Below(std::size(kNumbers))];
      } else {
        t += kWords[r.Below(std::size(kWords))];
      }
      t += r.Below(12) == 0 ? ". " : " ";
    }
    bytes += t.size();
    out.push_back(std::move(t));
  }
  return out;
}

double CpuSeconds() {
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + ts.tv_nsec * 1e-9;
}

void Run(const char* label, const RuleSet& rules, const std::vector<std::string>& texts, size_t bytes) {
  auto s = Screener::Build(rules);
  if (!s.ok()) {
    std::fprintf(stderr, "%s: %s\n", label, s.status().message().c_str());
    std::exit(1);
  }
  double best = 1e9, best_cpu = 1e9;
  size_t findings = 0;
  for (int rep = 0; rep < 3; ++rep) {
    findings = 0;
    double c0 = CpuSeconds();
    auto t0 = std::chrono::steady_clock::now();
    for (const std::string& t : texts) {
      auto r = s.value().Scan(t, FieldKind::kCandidate);
      if (!r.ok()) {
        std::fprintf(stderr, "scan failed: %s\n", r.status().message().c_str());
        std::exit(1);
      }
      findings += r.value().size();
    }
    auto t1 = std::chrono::steady_clock::now();
    best_cpu = std::min(best_cpu, CpuSeconds() - c0);
    best = std::min(best, std::chrono::duration<double>(t1 - t0).count());
  }
  std::printf("%-22s rules=%-3zu cpu %7.1f MB/s  wall %7.1f MB/s  findings=%zu\n", label, rules.rules.size(),
              bytes / best_cpu / 1e6, bytes / best / 1e6, findings);
}

}  // namespace

int main(int argc, char** argv) {
  size_t mb = argc > 1 ? static_cast<size_t>(std::atol(argv[1])) : 40;
  size_t hits = 0;
  std::vector<std::string> texts = MakeTexts(mb * 1000000, &hits);
  size_t bytes = 0;
  for (const auto& t : texts) bytes += t.size();
  std::printf("texts=%zu bytes=%zu planted_items=%zu (%.1f%% of texts)\n", texts.size(), bytes, hits,
              100.0 * hits / texts.size());
  const std::vector<std::string> packs = {"contact", "payment", "government", "network", "secrets", "people"};
  auto all = LoadRulePacks(prefsift::DefaultFileSystem(), packs, PREFSIFT_RULES_DIR);
  if (!all.ok()) {
    std::fprintf(stderr, "%s\n", all.status().message().c_str());
    return 1;
  }
  Run("all packs", all.value(), texts, bytes);
  for (const std::string& p : packs) {
    auto one = LoadRulePacks(prefsift::DefaultFileSystem(), {p}, PREFSIFT_RULES_DIR);
    Run(("pack " + p).c_str(), one.value(), texts, bytes);
  }
  for (size_t n : {1u, 5u}) {
    RuleSet sub;
    sub.rules.assign(all.value().rules.begin(), all.value().rules.begin() + n);
    Run(("first " + std::to_string(n) + " rule(s)").c_str(), sub, texts, bytes);
  }
  return 0;
}
