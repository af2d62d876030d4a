// Typed results that a stage's Decide publishes for later stages, the store
// and the summary (docs/architecture.md, "How data flows"). One value per
// type; a reader asks for the type it needs and gets null when no stage
// published it (e.g. the stage did not run).
//
//   NearClusters    near -> split, store: cluster id per record
//   NearSignatures  near -> store, shard-sign: compact signatures and banding
//                   (only when a caller asks for them: StageResults::want_signatures)
//
// Thread-safety: filled and read on the decide thread only.
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <typeindex>
#include <utility>
#include <vector>

namespace prefsift {

// near: per record, the id of its near-duplicate cluster (the smallest member
// record index) or -1 when it is in none.
struct NearClusters {
  std::vector<int64_t> cluster;
};

// near: each record's compact MinHash signature (`slots` bytes a record, in
// record order) and the banding it was clustered with; a store keeps them
// (docs/store.md). threshold < 0: verification is "exact" (not storable).
struct NearSignatures {
  std::vector<uint8_t> bytes;
  uint32_t slots = 0, bands = 0, rows = 0;
  double threshold = 0;
};

class StageResults {
 public:
  // Set by a caller that keeps signatures (a store, shard-sign) before the run.
  bool want_signatures = false;

  template <class T>
  void Publish(T value) {
    items_[std::type_index(typeid(T))] = std::make_shared<const T>(std::move(value));
  }
  template <class T>
  const T* Find() const {
    auto it = items_.find(std::type_index(typeid(T)));
    return it == items_.end() ? nullptr : static_cast<const T*>(it->second.get());
  }

 private:
  std::map<std::type_index, std::shared_ptr<const void>> items_;
};

}  // namespace prefsift
