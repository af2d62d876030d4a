#include "core/run_state.h"

#include <algorithm>
#include <bit>

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
  if (2 * texts_.size() >= text_slots_.size()) {  // grow (and at the first text): rehash every id
    std::vector<uint32_t> slots(std::bit_ceil(std::max<size_t>(64, 4 * texts_.size())), 0);
    const size_t mask = slots.size() - 1;
    for (uint32_t id = 1; id < texts_.size(); ++id) {
      size_t i = HashBytes(texts_[id]).lo & mask;
      while (slots[i] != 0) i = (i + 1) & mask;
      slots[i] = id;
    }
    text_slots_ = std::move(slots);
  }
  const size_t mask = text_slots_.size() - 1;
  size_t i = HashBytes(s).lo & mask;
  for (; text_slots_[i] != 0; i = (i + 1) & mask) {
    if (texts_[text_slots_[i]] == s) return text_slots_[i];
  }
  const auto id = static_cast<uint32_t>(texts_.size());
  texts_.emplace_back(s);
  text_slots_[i] = id;
  return id;
}

const RejectText& RunState::RejectTextOf(const Decision& d) const {
  static const RejectText kNone;
  return d.text < reject_texts.size() ? reject_texts[d.text] : kNone;
}

}  // namespace prefsift
