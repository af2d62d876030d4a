// Preference graphs: strongly connected components (Tarjan 1972), used to
// find intransitive judgments (A over B, B over C, C over A) among the
// candidates of one prompt. Pure functions, thread-safe.
#pragma once

#include <cstdint>
#include <utility>
#include <vector>

namespace prefsift::stats {

// Component id of every node 0..nodes-1 of the directed graph `edges`
// (from, to). Ids are numbered in order of each component's smallest node,
// so the result does not depend on the order of `edges`.
// REQUIRES: every endpoint < nodes.
std::vector<uint32_t> StronglyConnectedComponents(uint32_t nodes,
                                                  const std::vector<std::pair<uint32_t, uint32_t>>& edges);

}  // namespace prefsift::stats
