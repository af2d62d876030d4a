// The preference record: what prefsift understands of one input line.
//
// A record owns copies of its texts (the parser's buffers are reused).
// Judgments of every shape are also held as dense ranks (1 = best), so stages
// need not care which shape the user's file had.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/layout.h"

namespace prefsift {

// What a chat turn's role says about it (the layout's user_roles and
// system_roles decide; any other role, e.g. an earlier assistant turn, is kOther).
enum class TurnKind : uint8_t { kOther, kUser, kSystem };

struct Turn {
  std::string role;
  std::string text;
  TurnKind kind = TurnKind::kOther;
};

// One string value found under the layout's metadata pointer.
struct MetadataString {
  std::string pointer;  // RFC 6901 JSON Pointer from the record's root, e.g. "/extra/contact"
  std::string text;
};

struct Record {
  std::string id;
  bool prompt_is_chat = false;
  std::string prompt;                     // the prompt string; for chat, "role: text" lines joined by '\n'
  std::vector<Turn> turns;                // chat turns (empty for a plain prompt)
  std::vector<std::string> candidates;    // B >= 2 candidate texts, in the file's order
  std::vector<std::string> candidate_origin;  // per candidate, when the layout names it
  JudgmentShape shape = JudgmentShape::kChoice;
  std::vector<int> ranks;                 // dense ranks, size B, 1 = best
  int chosen = -1;                        // the single best candidate, -1 when the top is tied
  std::optional<std::string> annotator, thread, source, timestamp, group;
  // Every string value under the layout's metadata pointer (depth-first, file
  // order), for stages that scan metadata text; empty without a metadata pointer.
  std::vector<MetadataString> metadata;

  // The text used to match prompts: the plain prompt, or the user turns of a
  // chat joined by '\n' (all turns when there is no user turn).
  std::string UserPromptText() const;
};

// Dense ranks from arbitrary rank numbers: {1,1,3} -> {1,1,2}.
std::vector<int> DenseRanks(const std::vector<long long>& ranks);

}  // namespace prefsift
