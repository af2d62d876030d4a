// Rule packs of the personal-data screen: the data model and the loader.
//
// A rule pack is a JSON file (comments allowed) in rules/ or anywhere on disk;
// its format is specified in docs/personal-data.md. Loading validates every
// field and compiles every pattern once; a bad file yields a Status naming the
// file, the line of the rule, the rule id and the reason (RE2's own message
// for a bad pattern). A RuleSet is a plain value: immutable after loading and
// safe to read from many threads.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <unordered_set>
#include <string_view>
#include <vector>

#include "core/file_system.h"
#include "core/status.h"

namespace prefsift::screen {

// Which part of a preference record a text comes from.
enum class FieldKind : uint8_t { kPrompt = 0, kCandidate = 1, kMetadata = 2 };
inline constexpr int kFieldKindCount = 3;

// What the caller should do with a finding's span.
enum class Action : uint8_t { kFlag = 0, kMask = 1, kPseudonymise = 2, kDrop = 3 };

std::string_view FieldKindName(FieldKind f);   // "prompt" | "candidates" | "metadata"
std::string_view ActionName(Action a);         // "flag" | "mask" | "pseudonymise" | "drop"

// Words looked for within `reach` bytes on either side of a span (rule key
// "nearby"): ASCII case-insensitive, and only where they start a word (the
// byte before is not an ASCII letter), so "tel" is found in "Tel.:" and
// "Telefon" but not "hotel".
struct NearbyWords {
  int reach = 40;
  std::vector<std::string> raise_with;  // any present: certainty += raise_by
  double raise_by = 0.0;
  std::vector<std::string> only_with;   // non-empty and none present: no finding
  std::vector<std::string> never_with;  // any present: no finding (a veto)
};

// A word list (rule key "first_word_in"): lower-cased words in a hash set.
using WordList = std::unordered_set<std::string>;

struct Rule {
  std::string kind;         // kind id, e.g. "card-number" (docs/personal-data.md, "Kind ids")
  std::string vendor;       // "" or the issuer of a credential shape, e.g. "github"
  std::string variant;      // "" or which of several rules of one kind, e.g. "salutation"
  std::string id;           // the rule's name: kind, kind/vendor or kind/variant; unique in a RuleSet
  std::string family;       // the pack's name ("contact", "payment", ...), for grouping
  std::string about;        // one line for people
  std::string shape;        // RE2 syntax, UTF-8; the span is capture group 1 if there is one, else the whole match
  std::string check;        // "" or a check name known to validators.h
  NearbyWords nearby;
  bool fields[kFieldKindCount] = {true, true, true};
  Action action = Action::kMask;
  double certainty = 0.8;   // base certainty in [0, 1]; also the first key of the overlap order
  // The span's first word (ASCII case-insensitive) must be in this list.
  std::shared_ptr<const WordList> first_word_in;
  std::string first_word_in_file;      // as written in the pack, for messages
  // No word of the span may be one of these (lower-cased; e.g. "pepper" for a
  // product built on a title, "library" for an organisation after "this is").
  std::vector<std::string> not_in_span;
  // Kept only if a finding of one of these kinds (of other rules) lies within
  // nearby.reach bytes of the span. Evaluated after all other findings.
  std::vector<std::string> beside;
  std::string source_file;  // where it was loaded from (for messages)
  int source_line = 0;      // 1-based line of the rule's kind in that file
};

struct RuleSet {
  std::vector<Rule> rules;  // in load order; the order breaks overlap ties
};

// Parses one pack from its text. `source_name` is used in error messages and
// is the path word lists ("first_word_in") are resolved against; they are read
// through `fs` (a pack that names a word list is refused when fs is null).
// Checks every field, the validator name and that the pattern compiles.
Result<RuleSet> ParseRulePack(std::string_view text, const std::string& source_name, FileSystem* fs = nullptr);

// Loads packs in the given order, reading them (and their word lists) through
// `fs`. An entry without '/' and not ending in ".json" is a pack name, read
// from `rules_dir`/<name>.json; anything else is a path. Rule ids must be
// unique across all packs.
Result<RuleSet> LoadRulePacks(FileSystem* fs, const std::vector<std::string>& names_or_paths,
                              const std::string& rules_dir);

}  // namespace prefsift::screen
