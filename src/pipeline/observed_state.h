// A run's observed state (pass 1) held in memory, written to a state file per
// part, and merged from the parts' files before deciding (docs/parts.md).
// Observing the parts of an input one by one,
// merging them in order and deciding gives the decisions of observing the
// whole input (tests/stages/observed_state_test.cc).
//
// A state file holds one part: the part's place (input, byte range, first
// line), a fingerprint of the plan settings that shape observation, the
// part's line and ingest figures, its entries (with the rejects made while
// reading), its records' facts (texts by value, interned again on loading),
// and one section per stage (Stage::SaveObserved).
//
// Thread-safety: one ObservedRun per thread.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <memory>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/run_state.h"
#include "core/status.h"
#include "io/file_system.h"
#include "pipeline/parts.h"
#include "pipeline/pipeline.h"

namespace prefsift {

class Stage;
class StageResults;
class StateReader;
struct InputIngest;

// A part merged into a run, and where its entries and records sit.
struct MergedPart {
  Part part;
  size_t first_entry = 0, entries = 0, first_record = 0, records = 0;
};

class ObservedRun {
 public:
  // The plan's stages named in `stage_names` (pipeline order, as `run`).
  // REQUIRES: `plan` outlives the run.
  // `fs`: what the stages read through (rule packs, evaluation sets, previous splits).
  static Result<std::unique_ptr<ObservedRun>> Start(const Plan& plan, const std::vector<std::string>& stage_names,
                                                    FileSystem* fs);
  ~ObservedRun();

  // Pass 1 over every input (each checked as it ends, as `run` does).
  Status ObserveAll(FileSystem* fs);
  // Pass 1 over one part (its input's checks wait for CheckInputs); a run
  // observes at most one part.
  Status ObservePart(const Part& part, FileSystem* fs);
  // The state file of the observed part, written atomically (a temporary
  // name in the same folder, then renamed).
  Status Save(const std::string& path, FileSystem* fs) const;
  // The state file's bytes (Save writes these).
  Result<std::string> SaveToBytes() const;
  // Appends a part's state file (parts in order: the next part of the same
  // input, or the first part of the next input).
  Status Append(const std::string& path, FileSystem* fs);
  Status AppendBytes(std::string bytes, const std::string& path);
  // After the last part: every input of the plan was read to its end, and
  // each passes the sanity checks `run` makes after reading it.
  Status CheckInputs() const;
  // Each stage's Decide, in pipeline order (options.companion's last, with
  // options.prior as the stages' prior data), then the gate (passes.h:
  // DecideStages); gate() and outcome() hold the results. The stages' typed
  // results live as long as the run (a companion may read them afterwards).
  Status Decide(const PipelineOptions& options = {});
  const nlohmann::ordered_json& gate() const { return *gate_; }
  const RunOutcome& outcome() const { return outcome_; }

  RunState& state() { return st_; }
  const RunState& state() const { return st_; }
  const std::vector<std::unique_ptr<Stage>>& stages() const { return stages_; }
  const Part* observed_part() const { return part_.get(); }
  const std::vector<MergedPart>& merged_parts() const { return merged_; }
  const std::vector<std::string>& stage_names() const { return stage_names_; }

 private:
  explicit ObservedRun(const Plan& plan);
  // AppendBytes' steps: the part follows the ones merged; the entries and
  // records sections appended (errors recorded in the reader).
  Status CheckNextPart(const Part& part, const std::string& which) const;
  void AppendEntries(StateReader& r, const Part& part, uint64_t* entries, uint64_t* with_record);
  void AppendRecords(StateReader& r, const std::vector<uint32_t>& text_id, size_t entry_base, uint64_t entries,
                     uint64_t with_record);
  const Plan& plan_;
  RunState st_;
  std::vector<std::unique_ptr<Stage>> stages_;
  std::vector<std::string> stage_names_;   // of the stages made, pipeline order
  std::vector<InputIngest> ingest_;        // per input
  std::unique_ptr<Part> part_;             // the part observed (ObservePart)
  std::vector<MergedPart> merged_;         // the parts appended, in order
  FileSystem* fs_ = nullptr;
  std::vector<std::string> command_stages_;  // as given to Start
  std::unique_ptr<nlohmann::ordered_json> gate_;
  std::unique_ptr<StageResults> results_;  // the stages' typed results (Decide)
  RunOutcome outcome_;
};

class StateWriter;

// A part's place (number, input, byte range, first line) in the "run" section
// of a state or decision file, and back.
void WritePart(StateWriter& w, const Part& p);
Part ReadPart(StateReader& r);

// A rejected entry's stage, reason and texts in a state or decision file, and
// back into `st` for entry `entry` (false when the reader failed).
void WriteReject(StateWriter& w, const RunState& st, const Decision& d);
bool ReadReject(StateReader& r, RunState& st, size_t entry);

// The fingerprint of what shapes observation: inputs' layouts and names,
// limits, normalisation, seed and stage settings (hex SHA-256).
std::string ObservationFingerprint(const Plan& plan, const std::vector<std::string>& stage_names);

}  // namespace prefsift
