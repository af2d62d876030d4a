// Stage "screen": the personal-data screen as a pipeline stage
// (docs/personal-data.md, "Pipeline stage").
//
// Observe scans each record's prompt (every chat turn's text separately), its
// candidates and the string values under the layout's metadata pointer with
// one compiled screen::Screener shared by all threads, and keeps only the
// findings (rule, place, byte offsets, action, masked preview), never the text.
// Decide rejects records with a "drop" finding (reason personal_data) and turns
// an engine error into a run error. Rewrite (pass 2) replaces mask and
// pseudonymise spans in the right string values; in a record that has a drop
// finding every finding is masked, so its copy in rejects.jsonl is masked too.
// WriteOutputs writes personal_data_findings.jsonl.
//
// Settings (plan "stages": {"screen": {...}}, docs/plan.md): packs, rules_dir,
// action, action_by_kind, key_file, key_env, fields, certainty_floor.
// The pseudonym key is held in memory only; it is never written or logged.
//
// Thread-safety: Observe may run concurrently for distinct record indexes after
// Grow(); everything else runs on one thread.
#pragma once

#include <memory>
#include <string>

#include "io/file_system.h"
#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeScreenStage(const Plan& plan, FileSystem* fs, Status* error);

// The rules folder used when the plan sets no "rules_dir": $PREFSIFT_RULES_DIR,
// else the first of <d>/share/prefsift/rules and <d>/rules that holds a .json
// file, for d = the executable's folder and up to four of its parents.
// Returns "" when none is found. The folders are looked at through `files`.
std::string DefaultRulesDir(FileSystem* files = DefaultFileSystem());

}  // namespace prefsift
