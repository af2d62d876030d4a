#include "core/record.h"

#include <algorithm>

namespace prefsift {

std::string Record::UserPromptText() const {
  if (!prompt_is_chat) return prompt;
  std::string out;
  bool any_user = false;
  for (const auto& t : turns) {
    if (t.kind == TurnKind::kUser) {
      if (any_user) out.push_back('\n');
      out += t.text;
      any_user = true;
    }
  }
  if (any_user) return out;
  // No turn has a user role: every turn but the system ones, and every turn
  // when that leaves nothing.
  bool any = false;
  for (const auto& t : turns) {
    if (t.kind == TurnKind::kSystem) continue;
    if (any) out.push_back('\n');
    out += t.text;
    any = true;
  }
  if (any) return out;
  for (size_t i = 0; i < turns.size(); ++i) {
    if (i) out.push_back('\n');
    out += turns[i].text;
  }
  return out;
}

std::vector<int> DenseRanks(const std::vector<long long>& ranks) {
  std::vector<long long> sorted(ranks);
  std::sort(sorted.begin(), sorted.end());
  sorted.erase(std::unique(sorted.begin(), sorted.end()), sorted.end());
  std::vector<int> out(ranks.size());
  for (size_t i = 0; i < ranks.size(); ++i) {
    out[i] = static_cast<int>(std::lower_bound(sorted.begin(), sorted.end(), ranks[i]) - sorted.begin()) + 1;
  }
  return out;
}

}  // namespace prefsift
