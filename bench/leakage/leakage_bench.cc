// leakage_bench: index M synthetic evaluation prompts, then check N synthetic
// training prompts with all three detectors (exact, 13-gram, MinHash near +
// containment) on T threads; prints the time of each phase.
// Usage: leakage_bench [N=1000000] [M=50000] [T=2]
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <thread>

#include "stages/leakage/leak_index.h"

int main(int argc, char** argv) {
  using namespace prefsift;  // NOLINT: benchmark main
  size_t n = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 1000000;
  size_t m = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 50000;
  unsigned threads = argc > 3 ? static_cast<unsigned>(std::atoi(argv[3])) : 2;
  std::mt19937_64 rng(7);
  std::vector<std::string> vocab;
  for (int i = 0; i < 20000; ++i) vocab.push_back("w" + std::to_string(i * 7919 % 100003));
  auto sentence = [&](size_t words) {
    std::string s;
    for (size_t i = 0; i < words; ++i) s += (i ? " " : "") + vocab[rng() % vocab.size()];
    return s;
  };
  EvalCorpus corpus;
  corpus.sets.push_back(EvalSetInfo{});
  corpus.sets[0].spec.name = "bench";
  for (size_t i = 0; i < m; ++i) {
    EvalItem it;
    it.id = std::to_string(i + 1);
    it.text = sentence(20 + rng() % 40);
    corpus.items.push_back(std::move(it));
  }
  std::vector<std::string> train(n);
  for (size_t i = 0; i < n; ++i) {
    train[i] = sentence(40 + rng() % 120);
    if (i % 1000 == 0) train[i] += " " + corpus.items[rng() % m].text;  // 0.1% leaks
  }
  double words = 0;
  for (const auto& t : train) words += static_cast<double>(std::count(t.begin(), t.end(), ' ') + 1);
  auto t0 = std::chrono::steady_clock::now();
  LeakSettings s;
  auto idx = LeakIndex::Build(corpus, s, NormalizeOptions{});
  if (!idx.ok()) {
    std::fprintf(stderr, "%s\n", idx.status().message().c_str());
    return 1;
  }
  auto t1 = std::chrono::steady_clock::now();
  std::vector<size_t> hits(threads, 0);
  std::vector<std::thread> pool;
  for (unsigned t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] {
      std::vector<LeakFinding> out;
      for (size_t i = t; i < n; i += threads) {
        out.clear();
        idx.value()->CheckPrompt(train[i], false, &out);
        hits[t] += !out.empty();
      }
    });
  }
  for (auto& th : pool) th.join();
  auto t2 = std::chrono::steady_clock::now();
  size_t total = 0;
  for (size_t h : hits) total += h;
  double build = std::chrono::duration<double>(t1 - t0).count();
  double check = std::chrono::duration<double>(t2 - t1).count();
  std::printf("evaluation prompts %zu, training prompts %zu (mean %.0f words), threads %u\n", m, n, words / double(n),
              threads);
  std::printf("index build   %.2f s (13-gram entries %llu)\n", build,
              static_cast<unsigned long long>(idx.value()->ngram_entries()));
  std::printf("check         %.2f s (%.0f prompts/s), contaminated %zu (planted %zu)\n", check, double(n) / check,
              total, (n + 999) / 1000);
  std::printf("total         %.2f s\n", build + check);
  return 0;
}
