// Work run beside the caller's own: on a helper thread started at once, or,
// when the caller asks for no thread (--threads 1) or none can be had, on the
// caller's thread when it waits. Used where a run has a piece of work that
// does not depend on what the caller does meanwhile (the leakage index's
// tables, pass 2's stage files, an output piece's hash).
//
// Wait runs or joins the work once. The destructor joins work started on a
// thread (every path out of the caller, an early error return too, waits
// for it) and drops work never started. The work must not throw.
// Thread-safety: one owner; the work itself must touch nothing the caller
// touches until Wait returns.
#pragma once

#include <functional>
#include <future>
#include <system_error>
#include <utility>

namespace prefsift {

class Beside {
 public:
  // `work` is copied (a lambda capturing by reference is the usual form).
  template <typename F>
  Beside(bool on_thread, F work) {
    if (on_thread) {
      try {
        done_ = std::async(std::launch::async, work);
        on_thread_ = true;
        return;
      } catch (const std::system_error&) {  // no thread to spare: at Wait
      }
    }
    later_ = std::move(work);
  }
  Beside(const Beside&) = delete;
  Beside& operator=(const Beside&) = delete;
  ~Beside() {
    if (done_.valid()) done_.get();
  }

  // The work done: joined, or run here now (once).
  void Wait() {
    if (done_.valid()) {
      done_.get();
    } else if (later_) {
      auto work = std::move(later_);
      later_ = nullptr;
      work();
    }
  }
  // Whether the work was started on a helper thread.
  bool on_thread() const { return on_thread_; }

 private:
  std::future<void> done_;
  std::function<void()> later_;
  bool on_thread_ = false;
};

}  // namespace prefsift
