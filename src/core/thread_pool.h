// ThreadPool: a fixed set of worker threads for data-parallel loops.
//
// ParallelFor(n, fn) runs fn(i, worker) for every i in [0, n) and returns when
// all calls have finished. The calling thread works too (as worker 0), so a
// pool of size T starts T - 1 threads, once, for its whole life. Indexes are
// handed out in small batches (1 to 16, fewer when n is small and towards the end) in increasing order; which worker runs which
// index is not deterministic, so fn must write only to storage owned by i
// (or by `worker`, e.g. a per-worker parser). A contract callers may rely
// on: index i is taken (and its batch run in order) before any index above
// it, so fn(j) may wait for something fn(i < j) does without a deadlock
// (pass 1's in-order step, pipeline.cc).
//
// Not reentrant: one ParallelFor at a time, from one thread.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstddef>
#include <cstdint>
#include <functional>
#include <mutex>
#include <thread>
#include <vector>

namespace prefsift {

class ThreadPool {
 public:
  // `threads` = 0 means one per hardware thread.
  explicit ThreadPool(unsigned threads);
  ~ThreadPool();
  ThreadPool(const ThreadPool&) = delete;
  ThreadPool& operator=(const ThreadPool&) = delete;

  unsigned size() const { return size_; }
  void ParallelFor(size_t n, const std::function<void(size_t i, unsigned worker)>& fn);

 private:
  void Run(unsigned worker);    // worker thread body
  void Drain(unsigned worker);  // takes batches until none are left

  unsigned size_;
  std::vector<std::thread> threads_;
  std::mutex mu_;
  std::condition_variable start_, done_;
  const std::function<void(size_t, unsigned)>* fn_ = nullptr;
  size_t n_ = 0;
  size_t batch_ = 1;
  std::atomic<size_t> next_{0};
  unsigned busy_ = 0;
  uint64_t generation_ = 0;
  bool stop_ = false;
};

}  // namespace prefsift
