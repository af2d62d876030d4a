// The colours of both reports (report.html of a run and of a whole store).
// Every colour has one meaning, the same in every chart: kept, rejected, each
// split, each stage, and two neutrals (an observed measure and its reference
// or comparison group). docs/report.md lists them with the reasoning for
// colour-blind readers; tests/reference/palette_cvd.py checks that reasoning.
// Thread-safety: constant data.
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace prefsift {

struct PaletteColour {
  const char* meaning;  // "kept", "rejected", "split:train", "stage:leakage", "measure", "reference"
  const char* hex;      // "#rrggbb"
  const char* note;     // what it marks, for the legend and docs
};

const std::vector<PaletteColour>& Palette();

// The colour of a meaning. A split or stage not in the palette (a name set in
// the plan, a stage added later) gets the reference grey, never another
// meaning's colour.
std::string ColourOf(std::string_view meaning);
std::string SplitColour(std::string_view split);
std::string StageColour(std::string_view stage);

}  // namespace prefsift
