#include "stats/preference_graph.h"

#include <algorithm>
#include <limits>

namespace prefsift::stats {

std::vector<uint32_t> StronglyConnectedComponents(uint32_t nodes,
                                                  const std::vector<std::pair<uint32_t, uint32_t>>& edges) {
  constexpr uint32_t kNone = std::numeric_limits<uint32_t>::max();
  // Adjacency in compressed form, targets sorted (deterministic traversal).
  std::vector<uint32_t> start(nodes + 1, 0), adj(edges.size());
  for (const auto& e : edges) ++start[e.first + 1];
  for (uint32_t v = 0; v < nodes; ++v) start[v + 1] += start[v];
  std::vector<uint32_t> fill(start.begin(), start.end() - 1);
  for (const auto& e : edges) adj[fill[e.first]++] = e.second;
  for (uint32_t v = 0; v < nodes; ++v) std::sort(adj.begin() + start[v], adj.begin() + start[v + 1]);

  // Iterative Tarjan.
  std::vector<uint32_t> index(nodes, kNone), low(nodes, 0), comp(nodes, kNone), stack, next_edge(nodes, 0);
  std::vector<bool> on_stack(nodes, false);
  std::vector<uint32_t> call;
  uint32_t counter = 0, comps = 0;
  for (uint32_t root = 0; root < nodes; ++root) {
    if (index[root] != kNone) continue;
    call.push_back(root);
    index[root] = low[root] = counter++;
    next_edge[root] = start[root];
    stack.push_back(root);
    on_stack[root] = true;
    while (!call.empty()) {
      uint32_t v = call.back();
      if (next_edge[v] < start[v + 1]) {
        uint32_t w = adj[next_edge[v]++];
        if (index[w] == kNone) {
          index[w] = low[w] = counter++;
          next_edge[w] = start[w];
          stack.push_back(w);
          on_stack[w] = true;
          call.push_back(w);
        } else if (on_stack[w]) {
          low[v] = std::min(low[v], index[w]);
        }
        continue;
      }
      if (low[v] == index[v]) {
        uint32_t w;
        do {
          w = stack.back();
          stack.pop_back();
          on_stack[w] = false;
          comp[w] = comps;
        } while (w != v);
        ++comps;
      }
      call.pop_back();
      if (!call.empty()) low[call.back()] = std::min(low[call.back()], low[v]);
    }
  }
  // Renumber by smallest member.
  std::vector<uint32_t> renum(comps, kNone);
  uint32_t next = 0;
  for (uint32_t v = 0; v < nodes; ++v) {
    if (renum[comp[v]] == kNone) renum[comp[v]] = next++;
    comp[v] = renum[comp[v]];
  }
  return comp;
}

}  // namespace prefsift::stats
