#include "core/run_state.h"

namespace prefsift {

void RunState::Count(const std::string& stage, const std::string& reason) {
  for (auto& [name, reasons] : by_stage_) {
    if (name == stage) {
      ++reasons[reason];
      return;
    }
  }
  by_stage_.push_back({stage, {{reason, 1}}});
}

bool RunState::Reject(size_t record, const std::string& stage, const std::string& reason, std::string message,
                      std::string detail, std::string field) {
  Decision& d = DecisionOf(record);
  if (d.rejected) return false;
  d.rejected = true;
  d.why = InternWhy(stage, reason);
  d.text = static_cast<uint32_t>(reject_texts.size());
  reject_texts.push_back(RejectText{std::move(field), std::move(message), std::move(detail), ""});
  Count(stage, reason);
  return true;
}

void RunState::RejectEntry(size_t entry, const std::string& stage, const std::string& reason, std::string field,
                           std::string message, std::string id) {
  Decision& d = decisions[entry];
  d.rejected = true;
  d.why = InternWhy(stage, reason);
  d.text = static_cast<uint32_t>(reject_texts.size());
  reject_texts.push_back(RejectText{std::move(field), std::move(message), "", std::move(id)});
  Count(stage, reason);
}

uint32_t RunState::InternWhy(const std::string& stage, const std::string& reason) {
  for (uint32_t i = 1; i < whys_.size(); ++i) {
    if (whys_[i].first == stage && whys_[i].second == reason) return i;
  }
  whys_.emplace_back(*names_.insert(stage).first, *names_.insert(reason).first);
  return static_cast<uint32_t>(whys_.size() - 1);
}

uint32_t RunState::InternText(std::string_view s) {
  if (s.empty()) return 0;
  auto it = text_ids_.find(s);
  if (it != text_ids_.end()) return it->second;
  const auto id = static_cast<uint32_t>(texts_.size());
  texts_.emplace_back(s);
  text_ids_.emplace(texts_.back(), id);
  return id;
}

const RejectText& RunState::RejectTextOf(const Decision& d) const {
  static const RejectText kNone;
  return d.text < reject_texts.size() ? reject_texts[d.text] : kNone;
}

}  // namespace prefsift
