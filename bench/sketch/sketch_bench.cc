// sketch_bench: times MinHash signing, LSH banding (candidate pairs) and
// clustering (verification + union-find) on synthetic prompts held in memory.
//
// Usage: sketch_bench [threads=2] [sizes=100000,1000000]
// Prompts are 20-200 words from a 30,000-word vocabulary (a few hundred
// frequent words make up ~30% of tokens); 10% are near copies of an earlier
// prompt with 1-3 words replaced. Deterministic (fixed seed). Each size is run
// with 1 thread and with `threads` threads, and the cluster ids are compared.
#include <time.h>

#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>
#include <thread>
#include <vector>

#include "sketch/clusters.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/shingles.h"

namespace {

using Clock = std::chrono::steady_clock;

// CPU seconds used by the whole process so far (all threads).
double CpuSeconds() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + static_cast<double>(ts.tv_nsec) * 1e-9;
}

double Seconds(Clock::time_point a, Clock::time_point b) {
  return std::chrono::duration<double>(b - a).count();
}

struct Rng {
  uint64_t s;
  uint64_t Next() {  // splitmix64
    uint64_t z = (s += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  uint32_t Below(uint32_t n) { return static_cast<uint32_t>(Next() % n); }
};

struct Corpus {
  std::string text;              // all prompts back to back
  std::vector<uint64_t> offset;  // N + 1 offsets
  std::string_view Get(size_t i) const {
    return std::string_view(text).substr(offset[i], offset[i + 1] - offset[i]);
  }
  size_t size() const { return offset.size() - 1; }
};

Corpus Generate(size_t n, uint64_t seed) {
  Rng rng{seed};
  std::vector<std::string> vocab;
  for (int i = 0; i < 30000; ++i) {
    std::string w;
    const uint32_t len = 2 + rng.Below(9);
    for (uint32_t c = 0; c < len; ++c) w.push_back(static_cast<char>('a' + rng.Below(26)));
    vocab.push_back(w);
  }
  Corpus c;
  c.text.reserve(n * 720);
  c.offset.push_back(0);
  std::vector<uint32_t> words;
  std::vector<std::vector<uint32_t>> recent;  // ring of recent originals to copy from
  recent.reserve(4096);
  for (size_t i = 0; i < n; ++i) {
    if (i > 100 && rng.Below(10) == 0 && !recent.empty()) {
      words = recent[rng.Below(static_cast<uint32_t>(recent.size()))];
      const uint32_t edits = 1 + rng.Below(3);
      for (uint32_t e = 0; e < edits; ++e) words[rng.Below(static_cast<uint32_t>(words.size()))] = rng.Below(30000);
    } else {
      words.clear();
      const uint32_t len = 20 + rng.Below(181);
      for (uint32_t k = 0; k < len; ++k) {
        words.push_back(rng.Below(10) < 3 ? rng.Below(300) : rng.Below(30000));
      }
      if (recent.size() < 4096) {
        recent.push_back(words);
      } else {
        recent[rng.Below(4096)] = words;
      }
    }
    for (size_t k = 0; k < words.size(); ++k) {
      if (k) c.text.push_back(' ');
      c.text += vocab[words[k]];
    }
    c.offset.push_back(c.text.size());
  }
  return c;
}

uint64_t Checksum(const std::vector<uint32_t>& v) {
  uint64_t h = 1469598103934665603ULL;
  for (uint32_t x : v) h = (h ^ x) * 1099511628211ULL;
  return h;
}

uint64_t Run(const Corpus& c, uint32_t threads) {
  using namespace prefsift::sketch;  // NOLINT: benchmark brevity
  const size_t n = c.size();
  const ShingleOptions so;
  const MinHashParams mp;
  const uint32_t k = mp.num_slots;
  ClusterOptions co;
  co.threads = threads;
  co.banding = ChooseBanding(k, co.threshold).value();

  std::vector<uint8_t> sigs(n * k);
  std::vector<std::string_view> views(n);
  for (size_t i = 0; i < n; ++i) views[i] = c.Get(i);
  const double c0 = CpuSeconds();
  const auto t0 = Clock::now();
  SignTextsCompact(views, so, mp, threads, sigs);
  const auto t1 = Clock::now();
  const double c1 = CpuSeconds();
  CandidateStats cs;
  const std::vector<uint64_t> pairs = CandidatePairs(sigs, k, co.banding, co.band_seed,
                                                     CandidateOptions{co.max_run, threads}, &cs);
  const auto t2 = Clock::now();
  const double c2 = CpuSeconds();
  auto cl = ClusterCandidates(sigs, k, pairs, co);
  const auto t3 = Clock::now();
  const double c3 = CpuSeconds();
  if (!cl.ok()) {
    std::fprintf(stderr, "error: %s\n", cl.status().message().c_str());
    std::exit(1);
  }
  const Clustering& r = cl.value();
  uint64_t in_clusters = 0;
  for (const auto& s : r.clusters) in_clusters += s.size;

  const double sign_s = Seconds(t0, t1);
  const double band_s = Seconds(t1, t2);
  const double clus_s = Seconds(t2, t3);
  const double total_s = Seconds(t0, t3);
  const double mb = static_cast<double>(c.text.size()) / 1e6;
  // Index memory: the compact signatures stay for the whole run; on top of
  // them the larger of the banding peak (one 8-byte word a record per thread,
  // plus the pair lists) and the clustering peak (pairs + 4-byte similarity
  // each, union-find 8 B, cluster ids 4 B, two 4-byte scratch arrays a record).
  const double sig_b = static_cast<double>(k);
  const double band_peak = 8.0 * threads * static_cast<double>(n) + 2.0 * 8.0 * static_cast<double>(cs.unique_pairs);
  const double clus_peak = 12.0 * static_cast<double>(pairs.size()) + 20.0 * static_cast<double>(n);
  const double per_record = sig_b + std::max(band_peak, clus_peak) / static_cast<double>(n);
  std::printf("N=%zu threads=%u text=%.1f MB banding b=%u r=%u\n", n, threads, mb,
              co.banding.bands, co.banding.rows);
  std::printf("  (wall-clock seconds; cpu = CPU seconds of all threads, which other load on the machine does not inflate)\n");
  std::printf("  sign     %7.3f s  %10.0f prompts/s  %7.1f MB/s  cpu %.3f s\n", sign_s, n / sign_s, mb / sign_s, c1 - c0);
  std::printf("  band     %7.3f s  %10.0f prompts/s  cpu %.3f s (bucket pairs %llu, distinct %llu, capped runs %llu, largest run %u)\n",
              band_s, n / band_s, c2 - c1, static_cast<unsigned long long>(cs.bucket_pairs),
              static_cast<unsigned long long>(cs.unique_pairs),
              static_cast<unsigned long long>(cs.capped_runs), cs.largest_run);
  std::printf("  cluster  %7.3f s  %10.0f prompts/s  cpu %.3f s (verified edges %llu, rejected %llu, clusters %zu holding %llu prompts)\n",
              clus_s, n / clus_s, c3 - c2, static_cast<unsigned long long>(r.stats.verified_edges),
              static_cast<unsigned long long>(r.stats.rejected_pairs), r.clusters.size(),
              static_cast<unsigned long long>(in_clusters));
  std::printf("  total    %7.3f s  %10.0f prompts/s  %7.1f MB/s  cpu %.3f s\n", total_s, n / total_s, mb / total_s, c3 - c0);
  std::printf("  index memory: %.0f B/record signatures + %.1f B/record peak transient = %.1f B/record\n",
              sig_b, per_record - sig_b, per_record);
  return Checksum(r.cluster_of);
}

}  // namespace

int main(int argc, char** argv) {
  const uint32_t threads = argc > 1 ? static_cast<uint32_t>(std::atoi(argv[1])) : 2;
  std::vector<size_t> sizes = {100000, 1000000};
  if (argc > 2) {
    sizes.clear();
    std::string s = argv[2];
    size_t pos = 0;
    while (pos < s.size()) {
      const size_t comma = s.find(',', pos);
      sizes.push_back(std::stoull(s.substr(pos, comma - pos)));
      if (comma == std::string::npos) break;
      pos = comma + 1;
    }
  }
  std::printf("hardware threads: %u\n", std::thread::hardware_concurrency());
  bool same = true;
  for (size_t n : sizes) {
    const auto g0 = Clock::now();
    const Corpus c = Generate(n, 42);
    std::printf("generated %zu prompts (%.1f MB) in %.2f s (not timed below)\n", n,
                static_cast<double>(c.text.size()) / 1e6, Seconds(g0, Clock::now()));
    const uint64_t one = Run(c, 1);
    if (threads > 1) {
      const uint64_t many = Run(c, threads);
      std::printf("  cluster ids identical for 1 and %u threads: %s\n", threads, one == many ? "yes" : "NO");
      same = same && one == many;
    }
  }
  return same ? 0 : 1;
}
