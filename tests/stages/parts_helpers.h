// Helpers for tests of parts (docs/parts.md): a generated input with
// something for every stage to find, and cutting inputs into parts.
#pragma once

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/random.h"
#include "pipeline/parts.h"
#include "run_helpers.h"
#include "stages/stage.h"

namespace prefsift::testing {

using GenJson = nlohmann::ordered_json;

inline std::vector<std::string> AllStageNames() {
  std::vector<std::string> names;
  for (const auto& info : AllStages()) names.push_back(info.name);
  return names;
}

// Byte offsets of the line starts of a file (the last one is the file's size).
inline std::vector<uint64_t> LineStarts(const std::string& path) {
  const std::string bytes = ReadFile(path);
  std::vector<uint64_t> starts{0};
  for (size_t i = 0; i < bytes.size(); ++i) {
    if (bytes[i] == '\n') starts.push_back(i + 1);
  }
  if (starts.back() != bytes.size()) starts.push_back(bytes.size());  // a last line without LF
  return starts;
}

// Cuts every input at the given fractions of its lines (a fraction repeated
// makes a part with no lines).
inline std::vector<Part> CutAt(const Plan& plan, const std::vector<double>& fractions) {
  std::vector<Part> parts;
  for (uint32_t in = 0; in < plan.inputs.size(); ++in) {
    const std::vector<uint64_t> starts = LineStarts(plan.inputs[in].path);
    const size_t lines = starts.size() - 1;
    size_t from = 0;
    for (size_t k = 0; k <= fractions.size(); ++k) {
      Part p;
      p.part = static_cast<uint32_t>(parts.size());
      p.input = in;
      p.path = plan.inputs[in].path;
      p.begin = starts[from];
      p.first_line = from + 1;
      if (k < fractions.size()) {
        const size_t to = std::max(from, static_cast<size_t>(fractions[k] * static_cast<double>(lines)));
        p.end = starts[to];
        from = to;
      }
      parts.push_back(std::move(p));
    }
  }
  return parts;
}

// A generated input unlike the samples (the Quayside tool library's help
// desk, invented): near-duplicate and repeated prompts, prompts copied from an
// evaluation set, fake personal data (RFC 2606 example domains), an annotator
// who always picks the first candidate, malformed and blank lines.
struct Generated {
  std::string input, eval, plan_dir;
};

inline Generated MakeQuaysideInput(uint64_t seed, size_t records) {
  uint64_t state = seed;
  uint64_t* rng = &state;
  const char* tools[] = {"drill", "ladder", "sander", "tile cutter", "pressure washer", "hedge trimmer", "router",
                         "jigsaw", "wallpaper steamer", "lawn aerator", "nail gun", "chop saw"};
  const char* asks[] = {"How long can I borrow the %s for a weekend project?",
                        "Is the %s safe to use on a rented flat's walls?",
                        "What deposit do you take for the %s and when do I get it back?",
                        "Can you show me how to change the blade on the %s before I take it home?",
                        "The %s I borrowed makes a grinding noise, should I stop using it?"};
  const char* answers[] = {"Bring it back by Monday evening and the deposit is returned at the counter.",
                           "Yes, but check for pipes and cables with the detector we lend for free.",
                           "Stop using it and bring it in; we will look at it without charge.",
                           "A volunteer can show you on Saturday mornings at the workshop bench.",
                           "Please read the laminated card in the case first; it lists the safety steps."};
  std::vector<std::string> eval_prompts;
  for (int i = 0; i < 12; ++i) {
    eval_prompts.push_back("Which member card lets me reserve the " + std::string(tools[i]) +
                           " two weeks ahead of a village fair on the green?");
  }
  std::string eval;
  for (const auto& p : eval_prompts) eval += p + "\n";
  std::vector<std::string> prompts;
  std::vector<GenJson> made;
  std::string lines;
  for (size_t r = 0; r < records; ++r) {
    std::string prompt;
    const uint64_t kind = UniformBelow(rng, 20);
    if (kind == 0 && !made.empty()) {
      GenJson again = made[UniformBelow(rng, made.size())];  // the same comparison, judged again
      again["id"] = "q" + std::to_string(r);
      again["who"] = "volunteer-" + std::to_string(UniformBelow(rng, 8));
      lines += again.dump() + "\n";
      continue;
    } else if (kind == 1 && !prompts.empty()) {
      prompt = prompts[UniformBelow(rng, prompts.size())] + " Thanks a lot.";  // near-duplicate
    } else if (kind == 2) {
      prompt = eval_prompts[UniformBelow(rng, eval_prompts.size())];  // leaked
    } else {
      char buf[256];
      std::snprintf(buf, sizeof buf, asks[UniformBelow(rng, 5)], tools[UniformBelow(rng, 12)]);
      prompt = buf;
      prompt += " Member number " + std::to_string(1000 + UniformBelow(rng, 9000)) + ".";
    }
    if (kind == 3) prompt += " Write to me at member" + std::to_string(r) + "@example.com please.";
    prompts.push_back(prompt);
    const size_t b = 2 + UniformBelow(rng, 2);
    GenJson cands = GenJson::array();
    for (size_t c = 0; c < b; ++c) {
      std::string text = answers[UniformBelow(rng, 5)];
      for (uint64_t extra = UniformBelow(rng, 4); extra > 0; --extra) text += " Ask at the counter if unsure.";
      if (c > 0 && UniformBelow(rng, 15) == 0) text = cands[0].get<std::string>() + ".";  // near-identical
      cands.push_back(text);
    }
    const uint64_t who = UniformBelow(rng, 8);
    const uint64_t choice = who == 0 ? 0 : UniformBelow(rng, b);
    GenJson j{{"id", "q" + std::to_string(r)},
           {"prompt", prompt},
           {"candidates", cands},
           {"choice", choice},
           {"who", "volunteer-" + std::to_string(who)},
           {"desk", r % 3 == 0 ? "phone" : "counter"},
           {"thread", "t" + std::to_string(r / 3)},
           {"at", "2026-05-" + std::string(r % 28 < 9 ? "0" : "") + std::to_string(r % 28 + 1) + "T10:" +
                      std::string(r % 60 < 10 ? "0" : "") + std::to_string(r % 60) + ":00Z"}};
    lines += j.dump() + "\n";
    made.push_back(std::move(j));
    if (r % 97 == 5) lines += "{\"id\":\"broken" + std::to_string(r) + "\",\"prompt\":\n";  // not JSON
    if (r % 89 == 7) lines += "   \n";                                                      // blank
  }
  Generated g;
  g.input = WriteFile("quayside.jsonl", lines);
  g.eval = WriteFile("quayside_eval.txt", eval);
  return g;
}

inline Plan QuaysidePlan(const Generated& g) {
  Plan plan = PlanFor({g.input},
                      GenJson{{"preset", "choice"}, {"annotator", "/who"}, {"source", "/desk"}, {"thread", "/thread"},
                           {"timestamp", "/at"}},
                      TempPath("quayside_out"));
  plan.seed = 7;
  plan.stages = GenJson{{"near", {{"threshold", 0.7}, {"candidates", "reject"}, {"max_per_cluster", 2}}},
                     {"leakage", {{"eval_sets", GenJson::array({GenJson{{"name", "fair"}, {"path", g.eval}}})}}},
                     {"screen", {{"action", "mask"}}},
                     {"bias", {{"position", {{"rebalance", true}}}}},
                     {"split", {{"tie_by", GenJson::array({"prompt", "near", "thread"})}}}};
  return plan;
}

}  // namespace prefsift::testing
