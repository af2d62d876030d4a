// The report palette; see palette.h and docs/report.md ("Colours").
#include "report/palette.h"

namespace prefsift {

// Chosen by hand for this project and checked with simulated protan-, deutan-
// and tritanomaly (Machado, Oliveira & Fernandes 2009, via Debian's
// python3-colorspacious) in tests/reference/palette_cvd.py: kept and rejected,
// the three splits, and stages next to each other in pipeline order stay apart
// in CAM02-UCS under each simulation, and the splits also differ in lightness so
// they survive grey-scale printing. Keep this table in the
// `{"meaning", "#rrggbb", ...}` shape: the check script reads it from here.
const std::vector<PaletteColour>& Palette() {
  static const std::vector<PaletteColour> k = {
      {"kept", "#1f5a9e", "records kept (in a split file)"},
      {"rejected", "#d0622c", "records rejected (rejects.jsonl), all stages together"},
      {"split:train", "#3b1f6b", "the train split"},
      {"split:valid", "#7a5aa8", "the valid split"},
      {"split:test", "#c3a9e0", "the test split"},
      {"stage:ingest", "#6b4f2a", "reading and validation"},
      {"stage:exact", "#e0b020", "exact duplicates and label conflicts"},
      {"stage:near", "#27a393", "near-duplicate prompts"},
      {"stage:leakage", "#8c1c13", "train/evaluation leakage"},
      {"stage:screen", "#e3a3b8", "personal-data screen"},
      {"stage:bias", "#86c5e8", "position and length bias"},
      {"stage:split", "#b9c24a", "group-aware splits"},
      {"stage:store", "#b07aa1", "a growing store's own checks"},
      {"stage:agreement", "#5fb87a", "annotator agreement"},
      {"measure", "#2e3338", "an observed count or share (records read, chosen answers)"},
      {"reference", "#c5ccd3", "the reference it is compared with (expected share, other answers, unnamed groups)"},
  };
  return k;
}

std::string ColourOf(std::string_view meaning) {
  for (const auto& c : Palette()) {
    if (meaning == c.meaning) return c.hex;
  }
  for (const auto& c : Palette()) {
    if (std::string_view(c.meaning) == "reference") return c.hex;
  }
  return "#c5ccd3";
}

std::string SplitColour(std::string_view split) { return ColourOf("split:" + std::string(split)); }

std::string StageColour(std::string_view stage) { return ColourOf("stage:" + std::string(stage)); }

}  // namespace prefsift
