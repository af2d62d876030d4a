// Reading a store: the batch history, a cumulative summary over every batch,
// and a digest of the whole content (docs/store.md).
//
// Thread-safety: each call opens its own connection; readers never block a
// writer (WAL) and see the last committed batch.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

#include "core/status.h"

namespace prefsift::store {

// One line per batch: number, time, records, kept, rejected, stored, plan and input digests.
Result<std::string> HistoryTable(const std::string& store_path);

// The whole store as a JSON object: batches (with digests and counts),
// totals, kept records and groups per split, near-duplicate clusters,
// evaluation-set digests per batch, rejects by reason summed over batches.
Status CumulativeSummary(const std::string& store_path, nlohmann::ordered_json* out);

// SHA-256 over a canonical dump of every table (equal digests = equal stores).
Result<std::string> StoreContentDigest(const std::string& store_path);

}  // namespace prefsift::store
