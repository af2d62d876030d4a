#include "stages/annotators/annotators_stage.h"
#include "stages/bias/bias_stage.h"
#include "stages/exact/exact_stage.h"
#include "stages/leakage/leakage_stage.h"
#include "stages/near/near_stage.h"
#include "stages/screen/screen_stage.h"
#include "stages/split/split_stage.h"
#include "stages/stage.h"

namespace prefsift {

const std::vector<StageInfo>& AllStages() {
  static const std::vector<StageInfo> kStages = {
      {"annotators", "annotator agreement beyond chance (Krippendorff's alpha), annotators who disagree with the rest, preference cycles, rushed judgments", &MakeAnnotatorsStage},
      {"exact", "exact duplicate comparisons, label conflicts, degenerate comparisons", &MakeExactStage},
      {"near", "near-duplicate prompts (MinHash + LSH clusters), near-identical candidates", &MakeNearStage},
      {"leakage", "train/evaluation leakage: exact, word n-gram and near-duplicate matches of evaluation prompts", &MakeLeakageStage},
      {"screen", "personal data and secrets (RE2 rule packs): flag, mask, pseudonymise or drop", &MakeScreenStage},
      {"bias", "position and length bias statistics, optional rebalancing, surface-feature shortcut audit", &MakeBiasStage},
      {"split", "group-aware stable train/valid/test splits (groups tied by prompt, near-duplicate cluster, thread)", &MakeSplitStage},
  };
  return kStages;
}

}  // namespace prefsift
