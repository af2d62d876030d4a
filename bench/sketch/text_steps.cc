// text_steps: single-thread throughput of the per-text steps pass 1 runs on
// every prompt and candidate (docs/performance.md): matching normalisation,
// word segmentation (counting words), word 3-gram shingles (XXH3, as before
// the candidate check had its own keys), word 3-gram keys (the near stage's
// candidate check, AppendWordGramKeys) and word 5-gram shingles with a
// 256-slot MinHash signature (the near stage's prompt signature; also the
// signature alone, with 128 slots, and both compact as a run makes them); and the
// byte scans of the bias stage's surface features and of the record facts
// (code points, words), each beside its plain byte-loop reference
// (docs/performance.md, "Vectorised scans"); then word counts and word
// 3-gram keys by each word-segmentation path this CPU runs.
//
// Matching normalisation is timed twice more as pass 1 runs it (into a
// reused buffer), punctuation kept and stripped.
//
// Usage: text_steps PREFS.jsonl [RECORDS=20000]
// Reads "prompt" (a string) and "candidates" (strings) of the first RECORDS
// lines; prints MB/s of each step over those texts, best of 3 repetitions.
#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "core/normalize.h"
#include "sketch/minhash.h"
#include "sketch/shingles.h"
#include "sketch/word_scan_path.h"
#include "stages/facts.h"
#include "stats/surface_features.h"

namespace {

using Clock = std::chrono::steady_clock;

template <typename F>
double BestMBps(size_t bytes, F&& step) {
  double best = 0;
  for (int rep = 0; rep < 3; ++rep) {
    const auto t0 = Clock::now();
    step();
    const double s = std::chrono::duration<double>(Clock::now() - t0).count();
    best = std::max(best, static_cast<double>(bytes) / 1e6 / s);
  }
  return best;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: text_steps PREFS.jsonl [RECORDS=20000]\n");
    return 2;
  }
  const size_t records = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 20000;
  std::ifstream in(argv[1]);
  std::vector<std::string> texts, prompts;
  size_t bytes = 0;
  std::string line;
  for (size_t n = 0; n < records && std::getline(in, line); ++n) {
    auto j = nlohmann::json::parse(line, nullptr, false);
    if (j.is_discarded() || !j.is_object()) continue;
    if (j.contains("prompt") && j["prompt"].is_string()) {
      texts.push_back(j["prompt"].get<std::string>());
      prompts.push_back(texts.back());
    }
    if (j.contains("candidates") && j["candidates"].is_array()) {
      for (const auto& c : j["candidates"]) {
        if (c.is_string()) texts.push_back(c.get<std::string>());
      }
    }
  }
  for (const auto& t : texts) bytes += t.size();
  std::printf("%zu texts, %.1f MB\n", texts.size(), static_cast<double>(bytes) / 1e6);
  size_t sink = 0;
  std::printf("normalise for matching   %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) sink += prefsift::NormalizeForMatch(t).size();
              }));
  // As pass 1 calls it (core/normalize.h): into a reused buffer, with the
  // plan's punctuation setting kept or stripped.
  std::string norm_out;
  for (const bool strip : {false, true}) {
    prefsift::NormalizeOptions o;
    o.strip_punctuation = strip;
    std::printf("normalise into, %s %7.0f MB/s\n", strip ? "strip   " : "keep    ", BestMBps(bytes, [&] {
                  for (const auto& t : texts) {
                    prefsift::NormalizeForMatchInto(t, o, &norm_out);
                    sink += norm_out.size();
                  }
                }));
  }
  std::printf("count words (UAX #29)    %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) sink += prefsift::sketch::CountWords(t);
              }));
  std::vector<uint64_t> grams;
  prefsift::sketch::ShingleOptions w3;
  w3.mode = prefsift::sketch::ShingleMode::kWords;
  w3.word_n = 3;
  std::printf("word 3-gram shingles     %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) {
                  grams.clear();
                  prefsift::sketch::AppendShingles(t, w3, &grams);
                  sink += grams.size();
                }
              }));
  std::printf("word 3-gram keys (cand.) %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) {
                  grams.clear();
                  prefsift::sketch::AppendWordGramKeys(t, 3, &grams);
                  sink += grams.size();
                }
              }));
  prefsift::sketch::ShingleOptions w5;
  prefsift::sketch::MinHashParams mh;
  mh.num_slots = 256;
  std::vector<uint64_t> sig(mh.num_slots);
  std::printf("5-gram shingles + MinHash %6.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) {
                  grams.clear();
                  prefsift::sketch::AppendShingles(t, w5, &grams);
                  prefsift::sketch::Sign(grams, mh, sig);
                  sink += sig[0] & 1;
                }
              }));
  // The near stage's per-prompt steps apart: shingling, then the signature
  // alone over shingles made beforehand (bytes are the prompts' bytes).
  std::vector<std::vector<uint64_t>> prompt_grams;
  size_t prompt_bytes = 0;
  for (const auto& t : prompts) {
    prompt_grams.emplace_back();
    prefsift::sketch::AppendShingles(t, w5, &prompt_grams.back());
    prompt_bytes += t.size();
  }
  std::printf("prompts: 5-gram shingles %6.0f MB/s\n", BestMBps(prompt_bytes, [&] {
                for (const auto& t : prompts) {
                  grams.clear();
                  prefsift::sketch::AppendShingles(t, w5, &grams);
                  sink += grams.size();
                }
              }));
  std::printf("prompts: MinHash alone   %7.0f MB/s\n", BestMBps(prompt_bytes, [&] {
                for (const auto& g : prompt_grams) {
                  prefsift::sketch::Sign(g, mh, sig);
                  sink += sig[0] & 1;
                }
              }));
  // K = 128 is the leakage stage's signature; in a run both stages sign
  // every prompt on the same thread, K = 256 then 128 (their compact bytes).
  prefsift::sketch::MinHashParams mh128 = mh;
  mh128.num_slots = 128;
  std::vector<uint64_t> sig128(mh128.num_slots);
  std::printf("prompts: MinHash K=128   %7.0f MB/s\n", BestMBps(prompt_bytes, [&] {
                for (const auto& g : prompt_grams) {
                  prefsift::sketch::Sign(g, mh128, sig128);
                  sink += sig128[0] & 1;
                }
              }));
  std::vector<uint8_t> compact(mh.num_slots), compact128(mh128.num_slots);
  std::printf("prompts: compact 256+128 %7.0f MB/s\n", BestMBps(prompt_bytes, [&] {
                for (const auto& g : prompt_grams) {
                  prefsift::sketch::Sign(g, mh, sig);
                  prefsift::sketch::Compact(sig, compact);
                  prefsift::sketch::Sign(g, mh128, sig128);
                  prefsift::sketch::Compact(sig128, compact128);
                  sink += compact[0] + compact128[0];
                }
              }));
  auto features = [&](auto compute) {
    for (const auto& t : texts) {
      const prefsift::stats::SurfaceFeatures f = compute(t);
      sink += f.words + f.code_points + f.list_items + f.has_refusal + f.has_url;
    }
  };
  std::printf("surface features, ref   %7.0f MB/s\n", BestMBps(bytes, [&] {
                features([](std::string_view t) { return prefsift::stats::ComputeSurfaceFeaturesReference(t); });
              }));
  std::printf("surface features        %7.0f MB/s\n", BestMBps(bytes, [&] {
                features([](std::string_view t) { return prefsift::stats::ComputeSurfaceFeatures(t); });
              }));
  std::printf("facts counts, ref       %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) sink += prefsift::CountCodePointsReference(t) + prefsift::CountWordsReference(t);
              }));
  std::printf("facts counts            %7.0f MB/s\n", BestMBps(bytes, [&] {
                for (const auto& t : texts) sink += prefsift::CountCodePoints(t) + prefsift::CountWords(t);
              }));
  // Word segmentation by each path this CPU runs (the lines above use the
  // widest; sketch/word_scan_path.h): the general UTF-8 loop, the byte-table
  // masks, SSE2 and the wide paths chosen at run time.
  for (const auto path : prefsift::sketch::detail::AvailableWordScanPaths()) {
    prefsift::sketch::detail::ForceWordScanPath(path);
    const char* name = prefsift::sketch::detail::WordScanPathName(path);
    std::printf("count words, %-11s %7.0f MB/s\n", name, BestMBps(bytes, [&] {
                  for (const auto& t : texts) sink += prefsift::sketch::CountWords(t);
                }));
    std::printf("3-gram keys, %-11s %7.0f MB/s\n", name, BestMBps(bytes, [&] {
                  for (const auto& t : texts) {
                    grams.clear();
                    prefsift::sketch::AppendWordGramKeys(t, 3, &grams);
                    sink += grams.size();
                  }
                }));
  }
  prefsift::sketch::detail::ResetWordScanPath();
  std::printf("(checksum %zu)\n", sink);
  return 0;
}
