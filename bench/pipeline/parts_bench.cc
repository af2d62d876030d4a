// Measures the observe and decide steps part by part (docs/scale.md) through
// the library (pipeline/observed_state.h), for the per-part rates and the
// state-file sizes of the worked example:
//
//   parts_bench observe PLAN PARTS_JSON PART OUT_STATE   one part: observe, save; prints seconds, entries, bytes
//   parts_bench decide PLAN PARTS_JSON STATE...          merge the state files in order, check, decide; prints seconds
//
// Run each under /usr/bin/time -v for the peak memory. Single-threaded, as the
// library's observe is (the CLI's --threads parallelises parsing).
#include <chrono>
#include <cstdio>
#include <string>
#include <vector>

#include "core/plan.h"
#include "pipeline/observed_state.h"
#include "pipeline/parts.h"
#include "stages/stage.h"

using namespace prefsift;  // NOLINT: a benchmark program

namespace {

double Now() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

int Fail(const Status& s) {
  std::fprintf(stderr, "parts_bench: %s\n", s.message().c_str());
  return 1;
}

std::vector<std::string> StageNames() {
  std::vector<std::string> names;
  for (const auto& s : AllStages()) names.push_back(s.name);
  return names;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 5) {
    std::fprintf(stderr, "usage: parts_bench observe PLAN PARTS_JSON PART OUT | decide PLAN PARTS_JSON STATE...\n");
    return 2;
  }
  std::string mode = argv[1];
  auto plan = LoadPlanFile(DefaultFileSystem(), argv[2]);
  if (!plan.ok()) return Fail(plan.status());
  auto text = ReadWholeFile(DefaultFileSystem(), argv[3]);
  if (!text.ok()) return Fail(text.status());
  auto parts = ParsePartsJson(text.value(), argv[3], &plan.value());
  if (!parts.ok()) return Fail(parts.status());
  auto run = ObservedRun::Start(plan.value(), StageNames(), DefaultFileSystem());
  if (!run.ok()) return Fail(run.status());
  double t0 = Now();
  if (mode == "observe" && argc == 6) {
    size_t i = std::stoul(argv[4]);
    if (i >= parts.value().size()) return Fail(Status::Usage("no such part"));
    if (Status s = run.value()->ObservePart(parts.value()[i], DefaultFileSystem()); !s.ok()) return Fail(s);
    double t1 = Now();
    if (Status s = run.value()->Save(argv[5], DefaultFileSystem()); !s.ok()) return Fail(s);
    double t2 = Now();
    auto bytes = ReadWholeFile(DefaultFileSystem(), argv[5]);
    std::printf("observe part %zu: %.3f s observe, %.3f s save, %zu entries, %zu state bytes\n", i, t1 - t0, t2 - t1,
                run.value()->state().entries.size(), bytes.ok() ? bytes.value().size() : size_t{0});
    return 0;
  }
  if (mode == "decide") {
    for (int a = 4; a < argc; ++a) {
      if (Status s = run.value()->Append(argv[a], DefaultFileSystem()); !s.ok()) return Fail(s);
    }
    double t1 = Now();
    if (Status s = run.value()->CheckInputs(); !s.ok()) return Fail(s);
    if (Status s = run.value()->Decide(); !s.ok()) return Fail(s);
    double t2 = Now();
    std::printf("decide: %.3f s merge of %d files, %.3f s decide, %zu entries\n", t1 - t0, argc - 4, t2 - t1,
                run.value()->state().entries.size());
    return 0;
  }
  std::fprintf(stderr, "parts_bench: unknown mode %s\n", mode.c_str());
  return 2;
}
