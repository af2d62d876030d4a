// Exit codes of the prefsift command (docs/cli.md, "Exit codes"): the one
// place that maps a Status to a process exit code.
#pragma once

#include <cstdint>

#include "core/status.h"

namespace prefsift {

enum ExitCode {
  kExitOk = 0,
  kExitInternal = 1,      // a bug, or an output could not be written
  kExitUsage = 2,         // command line, plan, layout or rule file (incl. an unstated 1-based choice)
  kExitInput = 3,         // an input cannot be read, or a configured limit stopped the run
  kExitGate = 4,          // the gate failed (or was incomplete under the default policy)
  kExitStrict = 5,        // --strict and at least one record was rejected
  kExitNothingKept = 6,   // every record was rejected (outputs are written for review)
  kExitEmptyInput = 7,    // an input file holds no record (nothing written)
  kExitLayoutSuspect = 8, // one ingest reason rejects more than limits.max_reject_share of a file (nothing written)
};

inline int ExitFor(const Status& s) {
  switch (s.code()) {
    case StatusCode::kOk: return kExitOk;
    case StatusCode::kUsage: return kExitUsage;
    case StatusCode::kInput: return kExitInput;
    case StatusCode::kLimit: return kExitInput;
    case StatusCode::kEmptyInput: return kExitEmptyInput;
    case StatusCode::kLayoutSuspect: return kExitLayoutSuspect;
    case StatusCode::kIo:
    case StatusCode::kInternal: return kExitInternal;
  }
  return kExitInternal;
}

// How a run that wrote its outputs ended, for its exit code.
struct RunEnd {
  uint64_t records = 0;
  uint64_t kept = 0;
  uint64_t rejected = 0;
  bool gate_failed = false;
  bool strict = false;  // --strict or "strict": true in the plan
};

// The exit code of a run (or a store batch) whose outputs are written, in
// this order: every record rejected (6), the gate failed (4), --strict with a
// reject (5), else 0.
inline int ExitForRun(const RunEnd& e) {
  if (e.records > 0 && e.kept == 0) return kExitNothingKept;
  if (e.gate_failed) return kExitGate;
  if (e.strict && e.rejected > 0) return kExitStrict;
  return kExitOk;
}

}  // namespace prefsift
