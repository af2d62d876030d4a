// PriorData: what a growing store already holds, as the stages see it
// (docs/store.md, docs/architecture.md). Read-only queries; the store
// (src/store) implements them over its database, and a plain run has none
// (StageContext::prior is null).
//
//   exact   FindComparison: a stored record with the same comparison key
//   near    StoredBanding, StoredInBand, StoredSignature: stored band keys and
//           signatures, so batch records can join stored clusters
//   near,   GroupsOfCluster, GroupTiedBy: stored groups and their splits,
//   split   so a batch record tied to a stored group takes its split
//
// Results that the stages decide against it are published as a PriorJoin
// (stages/prior_join.h); the store persists that after the batch.
// Thread-safety: called from the decide thread only.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/hash.h"
#include "core/status.h"

namespace prefsift {

// What a batch record that ties stored groups in different splits gets.
enum class PriorConflictPolicy {
  kReject,     // rejected with store_group_conflict (the default)
  kJoinFirst,  // joins the group accepted first and takes its split
};

struct StoredComparison {
  Hash128 judgment;  // the stored judgment's hash (ComparisonKeyOf)
  std::string id;
  int64_t batch = 0;
};

struct StoredGroup {
  int64_t group = 0;
  std::string split;
  std::string key;  // the group key as stored (16 bytes)
  int64_t first_batch = 0;
};

class PriorData {
 public:
  virtual ~PriorData() = default;
  // The store's path, for messages.
  virtual const std::string& where() const = 0;
  // The sequence number the batch's first record gets (record i: first_seq() + i).
  virtual int64_t first_seq() const = 0;
  virtual PriorConflictPolicy conflict_policy() const = 0;

  virtual Result<std::optional<StoredComparison>> FindComparison(const Hash128& comparison) const = 0;

  // The near banding the store was built with, as JSON text ("" for a new store).
  virtual Result<std::string> StoredBanding() const = 0;
  // Stored records (sequence numbers, ascending) with a band key (31-bit band row).
  virtual Status StoredInBand(int64_t band_row, std::vector<int64_t>* seqs) const = 0;
  // A stored record's compact signature and its cluster id; nullopt when it has none.
  struct SignatureAndCluster {
    std::string signature;
    int64_t cluster = 0;
  };
  virtual Result<std::optional<SignatureAndCluster>> StoredSignature(int64_t seq) const = 0;

  // The groups (ascending) of the kept stored records of a cluster.
  virtual Status GroupsOfCluster(int64_t cluster, std::vector<StoredGroup>* groups) const = 0;
  // The stored group tied by a tie kind (split stage order: prompt 0, near 1,
  // thread 2, annotator 3, group 4) and key, if any.
  virtual Result<std::optional<StoredGroup>> GroupTiedBy(int kind, const std::string& key) const = 0;
};

}  // namespace prefsift
