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

void RegisterPartialOutput(const std::string& path) {
  std::lock_guard<std::mutex> lock(Mu());
  Paths().insert(path);
}

void UnregisterPartialOutput(const std::string& path) {
  std::lock_guard<std::mutex> lock(Mu());
  Paths().erase(path);
}

}  // namespace prefsift
