// GateFigures: the typed figures the gate judges (report/gate.h,
// docs/gate.md). The pipeline fills the ledger's; each stage fills its own in
// its Decide (stages/stage_context.h). A figure left unset means "not
// evaluated" with the reason the gate gives. Nothing here is read from
// summary.json: the gate is decided before pass 2 writes anything.
#pragma once

#include <cstdint>
#include <optional>
#include <set>
#include <string>
#include <vector>

namespace prefsift {

struct GateFigures {
  // The pipeline: every non-blank input line, the records kept, the records parsed.
  uint64_t records_in = 0, kept = 0, parsed = 0;
  // The stages whose Decide ran (each stage adds its name).
  std::set<std::string> stages_ran;

  // exact: records in label conflicts.
  uint64_t label_conflict_records = 0;

  // leakage: per evaluation set (in the plan's order), the largest share of
  // checked records with a finding of one detector against it; and whether
  // no contaminated record was left flagged (all dropped).
  struct LeakageSet {
    std::string name;
    double rate = 0;
  };
  std::vector<LeakageSet> leakage_by_set;
  bool leakage_none_flagged = false;

  // screen: findings left in kept records with no action applied.
  std::optional<long long> personal_data_left;

  // bias: the smallest p of the chosen-slot tests (adjusted, or unadjusted
  // after rebalancing; position_scope says which), and the shortcut audit.
  std::optional<double> min_position_p;
  std::string position_scope;
  bool position_ran = false;
  std::optional<double> shortcut_accuracy, shortcut_lift;
  bool shortcut_flagged = false;

  // split: every split check passed.
  std::optional<bool> split_checks_passed;

  // annotators: agreement over comparisons with two or more annotators, and
  // the share of judgments from annotators flagged for review.
  std::optional<double> annotator_alpha, flagged_annotator_share;
};

}  // namespace prefsift
