#include "core/thread_pool.h"

#include <algorithm>

namespace prefsift {
namespace {
// Indexes taken at a time: up to 16 (few atomics for many small items), down
// to 1 when there are few items (e.g. a handful of files or folds), so that
// every worker still gets some.
size_t BatchFor(size_t n, unsigned workers) {
  return std::max<size_t>(1, std::min<size_t>(16, n / (4 * static_cast<size_t>(workers))));
}
}  // namespace

ThreadPool::ThreadPool(unsigned threads)
    : size_(threads ? threads : std::max(1u, std::thread::hardware_concurrency())) {
  for (unsigned w = 1; w < size_; ++w) threads_.emplace_back([this, w] { Run(w); });
}

ThreadPool::~ThreadPool() {
  {
    std::lock_guard<std::mutex> lock(mu_);
    stop_ = true;
  }
  start_.notify_all();
  for (auto& t : threads_) t.join();
}

void ThreadPool::Drain(unsigned worker) {
  for (;;) {
    // Batches shrink towards the end (a quarter of a worker's share of what is
    // left, at most batch_), so workers finish within about one index of each
    // other instead of one waiting out another's last 16.
    const size_t seen = next_.load(std::memory_order_relaxed);
    if (seen >= n_) return;
    const size_t take = std::clamp<size_t>((n_ - seen) / (4 * static_cast<size_t>(size_)), 1, batch_);
    size_t begin = next_.fetch_add(take, std::memory_order_relaxed);
    if (begin >= n_) return;
    size_t end = std::min(n_, begin + take);
    for (size_t i = begin; i < end; ++i) (*fn_)(i, worker);
  }
}

void ThreadPool::Run(unsigned worker) {
  uint64_t seen = 0;
  for (;;) {
    {
      std::unique_lock<std::mutex> lock(mu_);
      start_.wait(lock, [&] { return stop_ || generation_ != seen; });
      if (stop_) return;
      seen = generation_;
    }
    Drain(worker);
    {
      std::lock_guard<std::mutex> lock(mu_);
      if (--busy_ == 0) done_.notify_one();
    }
  }
}

void ThreadPool::ParallelFor(size_t n, const std::function<void(size_t, unsigned)>& fn) {
  if (size_ == 1 || n <= 1) {
    for (size_t i = 0; i < n; ++i) fn(i, 0);
    return;
  }
  {
    std::lock_guard<std::mutex> lock(mu_);
    fn_ = &fn;
    n_ = n;
    batch_ = BatchFor(n, size_);
    next_.store(0, std::memory_order_relaxed);
    busy_ = size_ - 1;
    ++generation_;
  }
  start_.notify_all();
  Drain(0);
  std::unique_lock<std::mutex> lock(mu_);
  done_.wait(lock, [&] { return busy_ == 0; });
  fn_ = nullptr;
}

}  // namespace prefsift
