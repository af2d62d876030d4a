// Progress: the progress line on the log during pass 1 and pass 2: lines and
// megabytes read in the current pass, and, when the inputs' total size is
// known (every input uncompressed), the percentage and the time left at the
// pass's rate so far. On a terminal it is one line rewritten twice a second;
// for logs and CI (`--progress`) a new line every few seconds (5 by default).
// Never written to an output file.
//
// Thread-safety: one thread at a time (the thread that reads the input).
#pragma once

#include <chrono>
#include <cstdint>
#include <cstdio>
#include <string>

namespace prefsift {

class Progress {
 public:
  Progress(bool terminal, bool lines, double every_s, std::FILE* log, uint64_t total_bytes)
      : terminal_(terminal), lines_(lines && !terminal), every_(std::chrono::milliseconds(terminal ? 500 :
                                                               static_cast<long long>(every_s * 1000))),
        log_(log), total_(total_bytes) {
    Phase("reading");
  }
  // A silent one (parts commands).
  static Progress Silent() { return Progress(false, false, 5, stderr, 0); }
  // Starts a pass: counts restart.
  void Phase(const char* verb) {
    verb_ = verb;
    start_ = last_ = std::chrono::steady_clock::now();
    done_bytes_ = 0;
  }
  // The size is unknown once an input turns out to be compressed (the reader
  // counts decompressed bytes).
  void Compressed() { total_ = 0; }
  void InputDone(uint64_t bytes) { done_bytes_ += bytes; }
  void Tick(const std::string& input, uint64_t lines, uint64_t bytes) {
    if (!terminal_ && !lines_) return;
    auto now = std::chrono::steady_clock::now();
    if (now - last_ < every_) return;
    last_ = now;
    const double s = std::chrono::duration<double>(now - start_).count();
    char buf[320];
    int n = std::snprintf(buf, sizeof buf, "%s %s: %llu lines, %.1f MB, %.0f s", verb_, input.c_str(),
                          static_cast<unsigned long long>(lines), static_cast<double>(bytes) / 1e6, s);
    const double f = total_ > 0 ? static_cast<double>(done_bytes_ + bytes) / static_cast<double>(total_) : 0;
    if (f > 0 && f <= 1 && n > 0 && static_cast<size_t>(n) < sizeof buf) {
      if (f < 0.01) std::snprintf(buf + n, sizeof buf - n, ", %.0f%% of the pass", 100 * f);  // too early for a rate
      else std::snprintf(buf + n, sizeof buf - n, ", %.0f%% of the pass, about %.0f s left", 100 * f, s * (1 - f) / f);
    }
    if (terminal_) std::fprintf(log_, "\r%-100s", buf);
    else std::fprintf(log_, "progress: %s\n", buf);
    std::fflush(log_);
    shown_ = true;
  }
  void Done() {
    if (shown_ && terminal_) std::fprintf(log_, "\r%100s\r", "");
    shown_ = false;
  }

 private:
  bool terminal_, lines_;
  std::chrono::milliseconds every_;
  std::FILE* log_;
  uint64_t total_;
  const char* verb_ = "reading";
  std::chrono::steady_clock::time_point start_, last_;
  uint64_t done_bytes_ = 0;
  bool shown_ = false;
};

}  // namespace prefsift
