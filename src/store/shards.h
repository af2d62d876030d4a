// Scale-out parts of the near-duplicate step (docs/store.md, "Scale out"):
// ShardSign runs the near stage alone over one shard (the plan's inputs) and adds
// signatures.jsonl to its output folder: a header line with the signature
// settings, then one line per signed record (id, input, line, signature in
// hex, band keys in hex). MergeShards reads several such files and clusters
// their union exactly as the near stage would over the concatenated shards
// (same LSH banding, same verification), writing clusters.jsonl.
//
// Thread-safety: one call at a time.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"

namespace prefsift::store {

// REQUIRES: plan.output set (a new folder, or --overwrite).
Status ShardSign(const Plan& plan, FileSystem* fs, std::FILE* log, bool table);

struct MergeOutcome {
  uint64_t records = 0, clusters = 0, records_in_clusters = 0;
};

// Files in the order their shards should be numbered; output folder as OutputDir.
Result<MergeOutcome> MergeShards(const std::vector<std::string>& files, const std::string& out_dir, bool overwrite,
                                 unsigned threads, FileSystem* fs);

}  // namespace prefsift::store
