#include "io/signal_cleanup.h"

#include <pthread.h>
#include <signal.h>

#include <cstdio>
#include <filesystem>
#include <mutex>
#include <set>
#include <thread>

namespace prefsift {
namespace {

std::mutex& Mu() {
  static std::mutex mu;
  return mu;
}
std::set<std::string>& Paths() {
  static std::set<std::string> paths;
  return paths;
}
// Set (under Mu) once a stop signal has arrived; from then on nothing new is
// made that the cleanup could miss.
bool& Stopping() {
  static bool stopping = false;
  return stopping;
}

sigset_t StopSignals() {
  sigset_t set;
  sigemptyset(&set);
  sigaddset(&set, SIGINT);
  sigaddset(&set, SIGTERM);
  sigaddset(&set, SIGHUP);
  return set;
}

void WaitAndClean() {
  sigset_t set = StopSignals();
  int sig = 0;
  if (sigwait(&set, &sig) != 0) return;
  {
    std::lock_guard<std::mutex> lock(Mu());
    Stopping() = true;
    for (const auto& p : Paths()) {
      std::error_code ec;
      std::filesystem::remove_all(p, ec);
      std::fprintf(stderr, "\nprefsift: stopped by signal %d; removed the partial output %s\n", sig, p.c_str());
    }
    Paths().clear();
  }
  // End the process as the signal would have: default action, then deliver it.
  ::signal(sig, SIG_DFL);
  pthread_sigmask(SIG_UNBLOCK, &set, nullptr);
  ::raise(sig);
}

}  // namespace

void RemovePartialOutputsOnSignal() {
  // A log or table whose reader has gone (`prefsift run ... | head`) must
  // neither end the run half-way, leaving its staging folder, nor cost its
  // outputs, which are files: writes to the closed pipe fail, the run goes on.
  ::signal(SIGPIPE, SIG_IGN);
  sigset_t set = StopSignals();
  pthread_sigmask(SIG_BLOCK, &set, nullptr);
  std::thread(WaitAndClean).detach();
}

Status CreatePartialOutput(const std::string& path, const std::function<Status()>& create) {
  // Under the lock the signal-waiting thread takes before it removes the
  // listed paths: made and listed before it looks, or not made at all.
  std::lock_guard<std::mutex> lock(Mu());
  if (Stopping()) return Status::Io("not creating " + path + ": the run is being stopped by a signal");
  Status s = create();
  if (s.ok()) Paths().insert(path);
  return s;
}

void UnregisterPartialOutput(const std::string& path) {
  std::lock_guard<std::mutex> lock(Mu());
  Paths().erase(path);
}

}  // namespace prefsift
