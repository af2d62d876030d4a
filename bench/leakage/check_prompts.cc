// leakage_check_prompts: the leakage stage's per-prompt work of pass 1 on real
// files, in one thread: for each training prompt, the texts (LeakIndex::Texts),
// the exact and near checks (CheckPrompt without the n-gram part) and the
// n-gram ids (CollectPromptGrams), as the stage's Observe makes them. Prints
// the CPU seconds of each part (best of the repeats) and a checksum of the
// findings and ids, so two builds can be compared on the same input
// (docs/leakage.md, "Per-prompt check").
// Usage: leakage_check_prompts EVAL.jsonl PREFS.jsonl [PROMPTS=50000] [REPEATS=3]
//        (evaluation prompts at /question, ids at /qid; training prompts at /prompt)
#include <nlohmann/json.hpp>

#include <sys/resource.h>

#include <algorithm>
#include <cstdio>
#include <fstream>
#include <string>
#include <vector>

#include "core/normalize.h"
#include "io/file_system.h"
#include "stages/leakage/leak_index.h"

namespace {

double CpuSeconds() {
  rusage u{};
  getrusage(RUSAGE_THREAD, &u);
  return double(u.ru_utime.tv_sec + u.ru_stime.tv_sec) + 1e-6 * double(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

}  // namespace

int main(int argc, char** argv) {
  using namespace prefsift;  // NOLINT: benchmark main
  if (argc < 3) {
    std::fprintf(stderr, "usage: %s EVAL.jsonl PREFS.jsonl [PROMPTS] [REPEATS]\n", argv[0]);
    return 2;
  }
  const size_t want = argc > 3 ? std::stoul(argv[3]) : 50000;
  const int repeats = argc > 4 ? std::stoi(argv[4]) : 3;
  EvalSetSpec spec;
  spec.name = "eval";
  spec.path = argv[1];
  spec.format = EvalFormat::kJsonl;
  spec.text_pointer = "/question";
  spec.id_pointer = "/qid";
  auto corpus = LoadEvalSets({spec}, DefaultFileSystem(), InputLimits{});
  if (!corpus.ok()) {
    std::fprintf(stderr, "%s\n", corpus.status().message().c_str());
    return 1;
  }
  auto built = LeakIndex::Build(corpus.value(), LeakSettings{}, NormalizeOptions{});
  if (!built.ok()) {
    std::fprintf(stderr, "%s\n", built.status().message().c_str());
    return 1;
  }
  LeakIndex& idx = *built.value();
  corpus.value() = EvalCorpus();
  idx.ReleaseMatchTables();  // as the stage holds it during pass 1
  std::vector<std::string> prompts, normalized;
  {
    std::ifstream in(argv[2]);
    std::string line;
    while (prompts.size() < want && std::getline(in, line)) {
      auto j = nlohmann::json::parse(line, nullptr, false);
      if (j.is_discarded() || !j.contains("prompt") || !j["prompt"].is_string()) continue;
      prompts.push_back(j["prompt"].get<std::string>());
      normalized.push_back(NormalizeForMatch(prompts.back(), NormalizeOptions{}));
    }
  }
  double best_texts = 1e300, best_check = 1e300, best_grams = 1e300;
  uint64_t findings = 0, id_sum = 0;
  for (int r = 0; r < repeats; ++r) {
    std::vector<std::string> stores(prompts.size());
    std::vector<LeakIndex::PromptTexts> texts(prompts.size());
    double c0 = CpuSeconds();
    for (size_t i = 0; i < prompts.size(); ++i) texts[i] = idx.Texts(prompts[i], normalized[i], &stores[i]);
    double c1 = CpuSeconds();
    std::vector<LeakFinding> out;
    findings = 0;
    for (size_t i = 0; i < prompts.size(); ++i) {
      out.clear();
      idx.CheckPrompt(texts[i], false, &out, /*with_ngram=*/false);
      for (const auto& f : out) findings += 1 + f.item + static_cast<uint64_t>(f.score * 1e6f);
    }
    double c2 = CpuSeconds();
    std::vector<uint32_t> ids;
    id_sum = 0;
    for (size_t i = 0; i < prompts.size(); ++i) {
      idx.CollectPromptGrams(texts[i], &ids);
      for (uint32_t id : ids) id_sum += id;
    }
    double c3 = CpuSeconds();
    best_texts = std::min(best_texts, c1 - c0);
    best_check = std::min(best_check, c2 - c1);
    best_grams = std::min(best_grams, c3 - c2);
  }
  std::printf("prompts %zu, repeats %d (CPU-s, best of the repeats, one thread)\n", prompts.size(), repeats);
  std::printf("texts   %.3f\ncheck   %.3f (exact, near)\ngrams   %.3f (n-gram ids)\ntotal   %.3f\n", best_texts,
              best_check, best_grams, best_texts + best_check + best_grams);
  std::printf("checksum findings %llu, ids %llu\n", static_cast<unsigned long long>(findings),
              static_cast<unsigned long long>(id_sum));
  return 0;
}
