// leakage_index_memory: loads one evaluation set (a JSONL file with a JSON
// Pointer to the prompt, as the pipeline plan names it), builds the leakage
// index with the default settings (every default detector on) and prints the
// bytes each structure holds, the seconds and CPU seconds of the build, and the
// process's resident memory after loading and at its peak (docs/leakage.md,
// "Memory").
// Usage: leakage_index_memory EVAL.jsonl [TEXT_POINTER=/question] [ID_POINTER=/qid]
#include <sys/resource.h>

#include <chrono>
#include <cstdio>
#include <fstream>
#include <string>

#include "io/file_system.h"
#include "stages/leakage/leak_index.h"

namespace {

double CpuSeconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return double(u.ru_utime.tv_sec + u.ru_stime.tv_sec) + 1e-6 * double(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

// VmRSS and VmHWM (peak) of this process, in MiB.
void Rss(double* now, double* peak) {
  std::ifstream in("/proc/self/status");
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmRSS:", 0) == 0) *now = std::stod(line.substr(6)) / 1024.0;
    if (line.rfind("VmHWM:", 0) == 0) *peak = std::stod(line.substr(6)) / 1024.0;
  }
}

}  // namespace

int main(int argc, char** argv) {
  using namespace prefsift;  // NOLINT: benchmark main
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s EVAL.jsonl [TEXT_POINTER] [ID_POINTER]\n", argv[0]);
    return 2;
  }
  EvalSetSpec spec;
  spec.name = "eval";
  spec.path = argv[1];
  spec.format = EvalFormat::kJsonl;
  spec.text_pointer = argc > 2 ? argv[2] : "/question";
  spec.id_pointer = argc > 3 ? argv[3] : "/qid";
  double rss0 = 0, peak0 = 0, rss1 = 0, peak1 = 0, rss2 = 0, peak2 = 0;
  Rss(&rss0, &peak0);
  auto corpus = LoadEvalSets({spec}, DefaultFileSystem(), InputLimits{});
  if (!corpus.ok()) {
    std::fprintf(stderr, "%s\n", corpus.status().message().c_str());
    return 1;
  }
  Rss(&rss1, &peak1);
  uint64_t text_bytes = 0;
  for (const auto& it : corpus.value().items) text_bytes += it.text.size();
  const double c0 = CpuSeconds();
  const auto t0 = std::chrono::steady_clock::now();
  auto idx = LeakIndex::Build(corpus.value(), LeakSettings{}, NormalizeOptions{});
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  const double cpu = CpuSeconds() - c0;
  if (!idx.ok()) {
    std::fprintf(stderr, "%s\n", idx.status().message().c_str());
    return 1;
  }
  Rss(&rss2, &peak2);
  std::printf("evaluation items %zu, text %.1f MB\n", corpus.value().items.size(), double(text_bytes) / 1e6);
  std::printf("%-58s %10s\n", "structure", "MB");
  uint64_t total = 0;
  for (const auto& p : idx.value()->Memory()) {
    if (p.bytes == 0) continue;
    std::printf("%-58s %10.1f\n", p.name.c_str(), double(p.bytes) / 1e6);
    total += p.bytes;
  }
  std::printf("%-58s %10.1f\n", "index total", double(total) / 1e6);
  std::printf("build %.2f s, %.2f CPU-s\n", wall, cpu);
  std::printf("RSS MiB: start %.0f, after load %.0f, after build %.0f; peak %.0f\n", rss0, rss1, rss2, peak2);
  // What the pipeline stage holds during pass 1: the evaluation corpus freed,
  // the n-gram item lists freed and the gram ids and texts compressed
  // (LeakIndex::ReleaseMatchTables); then after pass 1 (ReleaseCheckTables, EndCollect).
  corpus.value() = EvalCorpus();
  const double c1 = CpuSeconds();
  idx.value()->ReleaseMatchTables();
  const double pack_cpu = CpuSeconds() - c1;
  auto total_of = [&]() {
    uint64_t t = 0;
    for (const auto& p : idx.value()->Memory()) t += p.bytes;
    return t;
  };
  std::printf("\nduring pass 1 (pipeline stage), CPU-s to compress %.2f\n", pack_cpu);
  for (const auto& p : idx.value()->Memory()) {
    if (p.bytes) std::printf("%-58s %10.1f\n", p.name.c_str(), double(p.bytes) / 1e6);
  }
  std::printf("%-58s %10.1f\n", "index total during pass 1", double(total_of()) / 1e6);
  idx.value()->ReleaseCheckTables();
  const double c2 = CpuSeconds();
  Status end = idx.value()->EndCollect();
  std::printf("after pass 1 (n-gram tables made again, CPU-s %.2f, %s): %.1f MB\n", CpuSeconds() - c2,
              end.ok() ? "ok" : end.message().c_str(), double(total_of()) / 1e6);
  return 0;
}
