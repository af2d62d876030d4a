// OnThreads: f(i) for every i in [0, n), spread over `threads` threads at once
// (thread t takes i = t, t + threads, ...), for tests of structures written
// concurrently (GramRows, HitRows).
#pragma once

#include <cstddef>
#include <thread>
#include <vector>

namespace prefsift {

template <typename F>
void OnThreads(size_t n, size_t threads, const F& f) {
  std::vector<std::thread> pool;
  for (size_t t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] {
      for (size_t i = t; i < n; i += threads) f(i);
    });
  }
  for (auto& th : pool) th.join();
}

}  // namespace prefsift
