// Test scenario for the annotators stage (docs/annotators.md): a seed-library
// help desk whose volunteers compare pairs of draft answers. Everything the
// stage must find is planted and returned as truth:
//   - annotators of known accuracy: "clicker" picks at random, "contrarian"
//     picks the worse answer 90% of the time, "vol-NN" pick the better answer
//     with accuracy 0.88-0.95 (with `bad_annotators` false there are only good ones);
//   - planted preference cycles: prompts with three answers judged pairwise
//     A over B, B over C, C over A, each by a different good volunteer;
//     other three-answer prompts get a 3-way choice plus the pair of the two
//     others in the true order (transitive by construction);
//   - rushed judgments: each volunteer works in sessions with 40-180 s between
//     judgments; a planted rushed judgment comes 2-8 s after the previous one.
// Candidate order is shuffled per record, so agreement must be read from the
// chosen answer's identity, not its slot. Deterministic given the seed.
#pragma once

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cstdint>
#include <map>
#include <random>
#include <set>
#include <string>
#include <vector>

namespace prefsift::testing {

struct AnnotatorScenario {
  std::string jsonl;
  nlohmann::ordered_json layout;
  std::set<std::string> bad_annotators;    // clicker, contrarian
  std::set<std::string> cycle_records;     // ids of the judgments that form planted cycles
  size_t cycle_prompts = 0;
  std::set<std::string> rushed_records;    // ids of planted rushed judgments
  std::vector<std::vector<uint32_t>> units;  // per shared comparison: the answers chosen (0 = better), for alpha
  std::map<std::string, std::string> annotator_of;  // id -> annotator
};

inline AnnotatorScenario MakeAnnotatorScenario(uint64_t seed, bool bad_annotators = true, int shared_prompts = 600,
                                               int cycles = 12, int clean_triads = 40, double rushed_rate = 0.01) {
  using Json = nlohmann::ordered_json;
  std::mt19937_64 rng(seed);
  auto uni = [&](double a, double b) { return std::uniform_real_distribution<double>(a, b)(rng); };
  auto pick = [&](size_t n) { return static_cast<size_t>(std::uniform_int_distribution<uint64_t>(0, n - 1)(rng)); };

  AnnotatorScenario sc;
  sc.layout = Json{{"preset", "choice"}, {"annotator", "/annotator"}, {"timestamp", "/at"}, {"source", "/source"}};
  std::vector<std::string> names;
  std::map<std::string, double> accuracy;
  for (int i = 1; i <= 10; ++i) {
    std::string n = (i < 10 ? "vol-0" : "vol-") + std::to_string(i);
    names.push_back(n);
    accuracy[n] = uni(0.88, 0.95);
  }
  if (bad_annotators) {
    names.push_back("clicker");
    accuracy["clicker"] = 0.5;  // with two answers, a random pick
    names.push_back("contrarian");
    accuracy["contrarian"] = 0.1;
    sc.bad_annotators = {"clicker", "contrarian"};
  }
  const std::vector<std::string> sources = {"desk", "mail"};
  const std::vector<std::string> crops = {"beans", "kale", "squash", "leeks", "chard", "peas", "onions", "garlic"};

  struct Draft {
    std::string annotator, prompt, source;
    std::vector<std::string> candidates;  // in file order
    int choice = 0;
    std::string id;
  };
  std::vector<Draft> drafts;
  int next_id = 0;
  auto add = [&](const std::string& ann, const std::string& prompt, const std::string& source,
                 std::vector<std::string> cands, size_t chosen) {
    // Shuffle the slots; remember where the chosen one went.
    std::vector<size_t> perm(cands.size());
    for (size_t i = 0; i < perm.size(); ++i) perm[i] = i;
    std::shuffle(perm.begin(), perm.end(), rng);
    Draft d;
    d.annotator = ann;
    d.prompt = prompt;
    d.source = source;
    for (size_t k = 0; k < perm.size(); ++k) {
      d.candidates.push_back(cands[perm[k]]);
      if (perm[k] == chosen) d.choice = static_cast<int>(k);
    }
    char buf[16];
    std::snprintf(buf, sizeof buf, "sl-%05d", ++next_id);
    d.id = buf;
    sc.annotator_of[d.id] = ann;
    drafts.push_back(std::move(d));
    return drafts.back().id;
  };

  // 1. Shared comparisons: two answers, judged by 3-5 distinct annotators.
  for (int p = 0; p < shared_prompts; ++p) {
    const std::string crop = crops[pick(crops.size())];
    const std::string prompt = "Question " + std::to_string(p) + ": when should I save " + crop + " seed?";
    const std::vector<std::string> cands = {"Save " + crop + " seed once the pods are dry on the plant (" +
                                                std::to_string(p) + ").",
                                            "Any time is fine for " + crop + " (" + std::to_string(p) + ")."};
    const std::string source = sources[pick(sources.size())];
    std::vector<std::string> pool = names;
    std::shuffle(pool.begin(), pool.end(), rng);
    const size_t k = 3 + pick(3);
    std::vector<uint32_t> unit;
    for (size_t i = 0; i < k; ++i) {
      const std::string& ann = pool[i];
      const size_t chosen = uni(0, 1) < accuracy[ann] ? 0 : 1;
      add(ann, prompt, source, cands, chosen);
      unit.push_back(static_cast<uint32_t>(chosen));
    }
    sc.units.push_back(unit);
  }
  // 2. Planted cycles: three answers, pairwise judgments A>B, B>C, C>A by three good volunteers.
  for (int c = 0; c < cycles; ++c) {
    const std::string prompt = "Loop " + std::to_string(c) + ": which compost mix suits seedlings?";
    const std::string a = "Sieved leaf mould with sand (" + std::to_string(c) + ").";
    const std::string b = "Garden soil straight from the bed (" + std::to_string(c) + ").";
    const std::string d = "Fresh manure only (" + std::to_string(c) + ").";
    std::vector<std::string> good(names.begin(), names.begin() + 10);
    std::shuffle(good.begin(), good.end(), rng);
    sc.cycle_records.insert(add(good[0], prompt, "desk", {a, b}, 0));
    sc.cycle_records.insert(add(good[1], prompt, "desk", {b, d}, 0));
    sc.cycle_records.insert(add(good[2], prompt, "desk", {d, a}, 0));
  }
  sc.cycle_prompts = static_cast<size_t>(cycles);
  // 3. Clean three-answer prompts: a 3-way choice of the best and the pair of the other two in order.
  for (int c = 0; c < clean_triads; ++c) {
    const std::string prompt = "Triad " + std::to_string(c) + ": how deep do I sow parsnips?";
    const std::string a = "About 1 cm deep, in rows (" + std::to_string(c) + ").";
    const std::string b = "Scatter them on top (" + std::to_string(c) + ").";
    const std::string d = "A spade's depth (" + std::to_string(c) + ").";
    add(names[pick(10)], prompt, "mail", {a, b, d}, 0);
    add(names[pick(10)], prompt, "mail", {b, d}, 0);
  }
  // 4. Order and time stamps: each annotator works through their records in sessions.
  std::shuffle(drafts.begin(), drafts.end(), rng);
  std::map<std::string, double> clock;
  std::map<std::string, int> in_session;
  std::map<std::string, std::string> stamp;
  for (const auto& d : drafts) {
    double& t = clock[d.annotator];
    if (t == 0) t = 1.7e9 + uni(0, 3600);
    int& n = in_session[d.annotator];
    double gap;
    if (n > 0 && n % 40 == 0) {
      gap = 7200 + uni(0, 3600);  // a new session
    } else if (n > 0 && uni(0, 1) < rushed_rate) {
      gap = uni(2, 8);
      sc.rushed_records.insert(d.id);
    } else {
      gap = uni(40, 180);
    }
    if (n > 0) t += gap;
    ++n;
    char buf[64];
    std::snprintf(buf, sizeof buf, "%.3f", t);  // Unix seconds
    stamp[d.id] = buf;
  }
  // Output in id order.
  std::sort(drafts.begin(), drafts.end(), [](const Draft& x, const Draft& y) { return x.id < y.id; });
  for (const auto& d : drafts) {
    Json j{{"id", d.id}, {"prompt", d.prompt}, {"candidates", d.candidates}, {"choice", d.choice},
           {"annotator", d.annotator}, {"at", stamp[d.id]}, {"source", d.source}};
    sc.jsonl += j.dump() + "\n";
  }
  return sc;
}

}  // namespace prefsift::testing
