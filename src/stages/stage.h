// Stage: one step of the pipeline, in three parts (docs/architecture.md).
//
//   Observe  per record, pass 1: compute small facts from the text.
//   Decide   once, over all facts: reject records, assign groups or splits.
//   Report   add a section to summary.json; WriteOutputs adds files.
//   Rewrite  pass 2: change a record before it is written (optional); applies
//            to kept records and to the copy embedded in rejects.jsonl.
//
// Observe may be called from several threads for distinct record indexes,
// after Grow(n) has sized the stage's storage; Rewrites and Rewrite (const)
// from several threads at once in pass 2; everything else runs on one
// thread. A stage must be deterministic given the plan and its seed.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <memory>
#include <string>

#include "core/gate_figures.h"
#include "core/record.h"
#include "core/status.h"
#include "core/run_state.h"
#include "stages/stage_context.h"

namespace prefsift {

class OutputDir;
class StateReader;
class StateWriter;
struct MatchText;

class Stage {
 public:
  virtual ~Stage() = default;
  virtual std::string name() const = 0;
  virtual void Grow(size_t /*records*/) {}
  // A hint, once, early in pass 1: about this many records are expected (from
  // the input size), so per-record storage can be reserved instead of grown by
  // doubling (which holds two copies at once). Never required for correctness.
  virtual void Reserve(size_t /*records*/) {}
  // `text` holds the record's normalised texts (facts.h), valid during the call only.
  virtual void Observe(size_t /*record*/, const Record& /*rec*/, const RecordFacts& /*facts*/,
                       const MatchText& /*text*/) {}
  // Observed state (state files; docs/parts.md): SaveObserved writes
  // what Observe kept, for every record so far; AppendObserved reads what
  // SaveObserved wrote for one part and appends it after the first_record
  // records already held (parts load in input order, after Grow(first_record
  // + the part's records)). Counts that Observe sums are added. A stage whose
  // Observe keeps nothing needs neither.
  virtual void SaveObserved(StateWriter& /*out*/) const {}
  virtual Status AppendObserved(StateReader& /*in*/, size_t /*first_record*/) { return Status::Ok(); }
  // Pass 1 is over (and every part's observed state is loaded): free what
  // only Observe needed, before any stage decides (docs/performance.md,
  // "Memory"). Called once, before the first Decide; `run` holds every
  // record's facts.
  virtual void ObserveDone(const RunState& /*run*/) {}
  // Decides over the facts of every record (rejects, groups, splits), publishes
  // its typed results (stages/stage_results.h) and fills its gate figures.
  virtual Status Decide(StageContext& ctx) = 0;
  // The stage's figures for the gate (core/gate_figures.h), after every stage
  // has decided and before pass 2: typed values, never read back from JSON.
  virtual void Figures(const RunState& /*state*/, GateFigures* /*figures*/) const {}
  virtual void Report(const RunState& state, nlohmann::ordered_json* section) const = 0;
  virtual Status WriteOutputs(const RunState& /*state*/, OutputDir& /*out*/) const { return Status::Ok(); }
  // Decided rewrites (decision files; docs/parts.md): SaveRewrites writes
  // what Rewrite needs for records [first, first + count), numbered from 0;
  // LoadRewrites reads that in a run that holds only those `count` records
  // (`prefsift apply` of one part). A stage without Rewrite needs neither.
  virtual void SaveRewrites(StateWriter& /*out*/, size_t /*first*/, size_t /*count*/) const {}
  virtual Status LoadRewrites(StateReader& /*in*/, size_t /*count*/) { return Status::Ok(); }
  virtual bool Rewrites(size_t /*record*/) const { return false; }
  virtual Status Rewrite(size_t /*record*/, const InputSpec& /*input*/, nlohmann::ordered_json* /*doc*/) const {
    return Status::Ok();
  }
};

// A companion to the stages for one run (a store, src/store; docs/store.md):
// it receives. Its Decide runs once after the last stage's, reads the typed
// results the stages published (StageContext::results) and persists them; it
// reports and writes outputs like a stage (summary section under its name). It
// is called between no stages and overrides no decision. Not in the registry.
class RunCompanion : public Stage {};

struct StageInfo {
  const char* name;
  const char* summary;  // one line for --help
  std::unique_ptr<Stage> (*make)(const Plan& plan, FileSystem* fs, Status* error);
};

// All stages, in pipeline order. Adding a stage: a file pair in src/stages and
// one row in the table in registry.cc.
const std::vector<StageInfo>& AllStages();

}  // namespace prefsift
