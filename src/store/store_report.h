// The datasheet and HTML report over a whole store (docs/store.md): the
// cumulative summary (history.h) mapped onto the sections the run renderers
// read (report/datasheet.h, report/html_report.h), plus a "whole_store"
// section they render as batches, store counts and evaluation-set notes.
//
// Writes store-summary.json, datasheet.json, datasheet.md and report.html
// into an output folder, atomically (io/output_dir.h). Deterministic: the
// same store gives byte-identical files; no clock time unless
// SOURCE_DATE_EPOCH is set (as in runs).
//
// Thread-safety: one call at a time per output folder; reading the store
// never blocks a writer (WAL) and sees the last committed batch.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"

namespace prefsift::store {

struct StoreReportOptions {
  std::string store_path;
  std::string out_dir;
  bool overwrite = false;
  // Optional: a plan whose "provenance" object answers the datasheet's
  // questions (dataset name, motivation, ...). Without it they read "not provided".
  const Plan* plan = nullptr;
};

// The cumulative summary in the shape of a run's summary.json (ledger,
// rejects_by_stage, stages.near/split/store, settings, gate, provenance) plus
// "whole_store".
nlohmann::ordered_json StoreAsRunSummary(const nlohmann::ordered_json& cumulative);

Status WriteStoreReport(const StoreReportOptions& options, FileSystem* fs);

}  // namespace prefsift::store
