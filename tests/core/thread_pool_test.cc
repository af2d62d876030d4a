// Tests of src/core/thread_pool: every index runs exactly once, on a worker id
// below size(), for many successive loops of different sizes.
#include "core/thread_pool.h"

#include <atomic>
#include <vector>

#include <gtest/gtest.h>

namespace prefsift {
namespace {

TEST(ThreadPool, EveryIndexOnceOverManyLoops) {
  for (unsigned threads : {1u, 2u, 3u, 8u}) {
    ThreadPool pool(threads);
    EXPECT_EQ(pool.size(), threads);
    for (size_t n : {0u, 1u, 15u, 16u, 17u, 100u, 4096u, 10007u}) {
      std::vector<std::atomic<int>> hits(n);
      std::atomic<bool> bad_worker{false};
      pool.ParallelFor(n, [&](size_t i, unsigned w) {
        hits[i].fetch_add(1);
        if (w >= threads) bad_worker = true;
      });
      for (size_t i = 0; i < n; ++i) ASSERT_EQ(hits[i].load(), 1) << "n=" << n << " i=" << i << " threads=" << threads;
      EXPECT_FALSE(bad_worker.load());
    }
  }
}

TEST(ThreadPool, ZeroMeansOnePerHardwareThread) {
  ThreadPool pool(0);
  EXPECT_GE(pool.size(), 1u);
}

TEST(ThreadPool, PerWorkerStorageNeedsNoLock) {
  ThreadPool pool(4);
  std::vector<uint64_t> sums(pool.size(), 0);  // one slot per worker: no two threads share one
  pool.ParallelFor(100000, [&](size_t i, unsigned w) { sums[w] += i; });
  uint64_t total = 0;
  for (uint64_t s : sums) total += s;
  EXPECT_EQ(total, uint64_t{100000} * 99999 / 2);
}

}  // namespace
}  // namespace prefsift
