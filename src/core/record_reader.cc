#include "core/record_reader.h"

#include <simdjson.h>

#include <algorithm>

#include "core/blank.h"

namespace prefsift {
namespace {

using simdjson::dom::element;
using simdjson::dom::element_type;

const char* TypeName(element_type t) {
  switch (t) {
    case element_type::ARRAY: return "an array";
    case element_type::OBJECT: return "an object";
    case element_type::INT64:
    case element_type::UINT64:
    case element_type::DOUBLE: return "a number";
    case element_type::STRING: return "a string";
    case element_type::BOOL: return "a boolean";
    case element_type::NULL_VALUE: return "null";
  }
  return "a value";
}

enum class Lookup { kFound, kMissing, kDuplicate, kNotContainer };

// Resolves `ptr` from `root`. Unlike a plain lookup it notices a key that
// occurs twice in an object on the path (JSON allows it; the meaning is then
// ambiguous, so the record is rejected rather than guessed at).
Lookup Resolve(element root, const JsonPointer& ptr, element* out, std::string* at) {
  element cur = root;
  std::string path;
  for (const auto& tok : ptr.tokens) {
    path += "/" + tok;
    if (cur.type() == element_type::OBJECT) {
      simdjson::dom::object obj = cur.get_object().value_unsafe();
      int found = 0;
      element next;
      for (auto field : obj) {
        if (field.key == tok) {
          if (found == 0) next = field.value;
          ++found;
        }
      }
      if (found == 0) { *at = path; return Lookup::kMissing; }
      if (found > 1) { *at = path; return Lookup::kDuplicate; }
      cur = next;
    } else if (cur.type() == element_type::ARRAY) {
      size_t idx;
      simdjson::dom::array arr = cur.get_array().value_unsafe();
      if (!ArrayIndexToken(tok, &idx) || idx >= arr.size()) { *at = path; return Lookup::kMissing; }
      cur = arr.at(idx).value_unsafe();
    } else {
      *at = path;
      return Lookup::kNotContainer;
    }
  }
  *out = cur;
  return Lookup::kFound;
}

std::string Join(const std::string& base, const JsonPointer& rel) {
  return base + rel.text;
}

// RFC 6901 section 3: '~' -> "~0", '/' -> "~1".
std::string EscapeToken(std::string_view key) {
  std::string out;
  for (char c : key) {
    if (c == '~') out += "~0";
    else if (c == '/') out += "~1";
    else out.push_back(c);
  }
  return out;
}

// Collects every string value under `e` with its pointer (depth-first, file order).
void CollectStrings(element e, const std::string& path, std::vector<MetadataString>* out) {
  switch (e.type()) {
    case element_type::STRING:
      out->push_back({path, std::string(e.get_string().value_unsafe())});
      break;
    case element_type::ARRAY: {
      size_t i = 0;
      simdjson::dom::array arr = e.get_array().value_unsafe();  // bound first: no range-for over a temporary
      for (element x : arr) CollectStrings(x, path + "/" + std::to_string(i++), out);
      break;
    }
    case element_type::OBJECT:
    {
      simdjson::dom::object obj = e.get_object().value_unsafe();
      for (auto field : obj) {
        CollectStrings(field.value, path + "/" + EscapeToken(field.key), out);
      }
      break;
    }
    default:
      break;
  }
}

}  // namespace

struct RecordReader::Impl {
  Layout layout;
  InputLimits limits;
  simdjson::dom::parser parser;
  BaseEvidence evidence;
};

const BaseEvidence& RecordReader::base_evidence() const { return impl_->evidence; }

namespace {

bool RoleIn(const std::string& role, const std::vector<std::string>& names) {
  std::string lower = role;
  for (auto& c : lower) c = static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c);
  return std::find(names.begin(), names.end(), lower) != names.end();
}

}  // namespace

RecordReader::RecordReader(const Layout& layout, const InputLimits& limits) : impl_(new Impl) {
  impl_->layout = layout;
  impl_->limits = limits;
  // Sets the depth limit; capacity grows on demand. A failure here only means
  // the first parse allocates instead.
  if (impl_->parser.allocate(1u << 16, limits.max_depth) != simdjson::SUCCESS) {
    impl_->limits.max_depth = simdjson::DEFAULT_MAX_DEPTH;
  }
}

RecordReader::~RecordReader() = default;

namespace {

// One line's reading, one method per field group, in the order the checks
// run (the first failing check names the reject). Every method returns false
// after Fail() has filled the reason.
class LineReading {
 public:
  LineReading(const Layout& layout, const InputLimits& limits, BaseEvidence* evidence, element root,
              RejectReason* why)
      : L(layout), lim(limits), evidence_(evidence), root_(root), why_(why) {}

  bool Fail(std::string code, std::string field, std::string message) {
    why_->id = seen_id_;
    why_->code = std::move(code);
    why_->field = std::move(field);
    why_->message = std::move(message);
    return false;
  }

  // id, or `default_id` when the layout has none (or an optional one is absent).
  bool ReadId(const std::string& default_id, Record* r);
  // The prompt: a string, or an array of chat turns.
  bool ReadPrompt(Record* r);
  // The candidates and the judgment (choice, ranks or order; pairwise: chosen
  // and rejected), then the check that no candidate is blank.
  bool ReadCandidatesAndJudgment(Record* r);
  // Annotator, thread, source, timestamp, group and metadata strings.
  bool ReadMeta(Record* r);

 private:
  // Looks a field up and checks its presence.
  bool Get(element base, const std::string& base_path, const JsonPointer& ptr, bool required, element* out,
           bool* present);
  bool TextOf(element e, const std::string& path, std::string* out);
  bool OptionalScalar(const JsonPointer& ptr, bool has, std::optional<std::string>* out);
  bool ReadChatTurns(element e, Record* r);
  bool ReadPairwise(Record* r);
  bool ReadCandidateList(size_t* b, Record* r);
  bool ReadChoice(size_t b, Record* r);
  bool ReadRanking(size_t b, Record* r);
  bool OrderToRanks(const std::vector<long long>& vals, size_t b, Record* r);
  bool RanksToDense(std::vector<long long> vals, Record* r);
  bool CheckNoBlankCandidate(const Record& r);

  const Layout& L;
  const InputLimits& lim;
  BaseEvidence* evidence_;
  element root_;
  RejectReason* why_;
  std::string seen_id_;
};

bool LineReading::Get(element base, const std::string& base_path, const JsonPointer& ptr, bool required,
                      element* out, bool* present) {
  std::string at;
  Lookup r = Resolve(base, ptr, out, &at);
  if (present) *present = (r == Lookup::kFound);
  switch (r) {
    case Lookup::kFound: return true;
    case Lookup::kDuplicate:
      return Fail("duplicate_key", base_path + at, "the key at " + base_path + at + " occurs more than once");
    case Lookup::kMissing:
    case Lookup::kNotContainer:
      if (!required) return true;
      return Fail("missing_field", base_path + ptr.text, "no value at " + base_path + ptr.text);
  }
  return false;
}

bool LineReading::TextOf(element e, const std::string& path, std::string* out) {
  if (e.type() != element_type::STRING) {
    return Fail("wrong_type", path, "the value at " + path + " is " + TypeName(e.type()) + ", not a string");
  }
  std::string_view sv = e.get_string().value_unsafe();
  if (sv.size() > lim.max_text_bytes) {
    return Fail("text_too_long", path, "the text at " + path + " has " + std::to_string(sv.size()) +
                                           " bytes, more than limits.max_text_bytes = " +
                                           std::to_string(lim.max_text_bytes));
  }
  out->assign(sv);
  return true;
}

bool LineReading::OptionalScalar(const JsonPointer& ptr, bool has, std::optional<std::string>* out) {
  if (!has) return true;
  element e;
  bool present = false;
  if (!Get(root_, "", ptr, false, &e, &present)) return false;
  if (!present || e.type() == element_type::NULL_VALUE) return true;
  if (e.type() == element_type::STRING) {
    *out = std::string(e.get_string().value_unsafe());
  } else if (e.type() == element_type::INT64) {
    *out = std::to_string(e.get_int64().value_unsafe());
  } else if (e.type() == element_type::UINT64) {
    *out = std::to_string(e.get_uint64().value_unsafe());
  } else {
    return Fail("wrong_type", ptr.text, "the value at " + ptr.text + " is " + TypeName(e.type()) +
                                             ", not a string or an integer");
  }
  return true;
}

bool LineReading::ReadId(const std::string& default_id, Record* r) {
  element id_e;
  bool id_present = false;
  if (L.has_id && !Get(root_, "", L.id, L.id_required, &id_e, &id_present)) return false;
  if (L.has_id && id_present && (L.id_required || id_e.type() != element_type::NULL_VALUE)) {
    // A preset's id pointer is optional: a record without it gets the default id.
    element e = id_e;
    if (e.type() == element_type::STRING) {
      r->id = std::string(e.get_string().value_unsafe());
    } else if (e.type() == element_type::INT64) {
      r->id = std::to_string(e.get_int64().value_unsafe());
    } else if (e.type() == element_type::UINT64) {
      r->id = std::to_string(e.get_uint64().value_unsafe());
    } else {
      return Fail("wrong_type", L.id.text, "the id at " + L.id.text + " is " + TypeName(e.type()) +
                                               ", not a string or an integer");
    }
    if (r->id.empty()) return Fail("missing_field", L.id.text, "the id at " + L.id.text + " is empty");
    seen_id_ = r->id;
  } else {
    r->id = default_id;
  }
  return true;
}

bool LineReading::ReadPrompt(Record* r) {
  element e;
  if (!Get(root_, "", L.prompt, true, &e, nullptr)) return false;
  if (e.type() == element_type::STRING) {
    if (!TextOf(e, L.prompt.text, &r->prompt)) return false;
  } else if (e.type() == element_type::ARRAY) {
    if (!ReadChatTurns(e, r)) return false;
  } else {
    return Fail("wrong_type", L.prompt.text, "the prompt at " + L.prompt.text + " is " + TypeName(e.type()) +
                                                 ", not a string or an array of chat turns");
  }
  if (!r->prompt_is_chat && IsBlank(r->prompt)) {
    return Fail("empty_prompt", L.prompt.text, "the prompt at " + L.prompt.text + " is empty");
  }
  return true;
}

bool LineReading::ReadChatTurns(element e, Record* r) {
  r->prompt_is_chat = true;
  size_t i = 0;
  simdjson::dom::array turns = e.get_array().value_unsafe();
  for (element turn : turns) {
    std::string base = L.prompt.text + "/" + std::to_string(i++);
    Turn t;
    element role, text;
    if (turn.type() != element_type::OBJECT) {
      return Fail("wrong_type", base, "the chat turn at " + base + " is " + TypeName(turn.type()) + ", not an object");
    }
    if (!Get(turn, base, L.turn_role, true, &role, nullptr)) return false;
    if (!TextOf(role, Join(base, L.turn_role), &t.role)) return false;
    if (!Get(turn, base, L.turn_text, true, &text, nullptr)) return false;
    if (!TextOf(text, Join(base, L.turn_text), &t.text)) return false;
    t.kind = RoleIn(t.role, L.user_roles) ? TurnKind::kUser
             : RoleIn(t.role, L.system_roles) ? TurnKind::kSystem
                                              : TurnKind::kOther;
    if (!r->prompt.empty()) r->prompt.push_back('\n');
    r->prompt += t.role + ": " + t.text;
    r->turns.push_back(std::move(t));
  }
  if (r->turns.empty()) return Fail("empty_prompt", L.prompt.text, "the chat at " + L.prompt.text + " has no turns");
  return true;
}

bool LineReading::ReadCandidatesAndJudgment(Record* r) {
  r->shape = L.judgment;
  if (L.judgment == JudgmentShape::kPairwise) {
    if (!ReadPairwise(r)) return false;
  } else {
    size_t b = 0;
    if (!ReadCandidateList(&b, r)) return false;
    if (L.judgment == JudgmentShape::kChoice) {
      if (!ReadChoice(b, r)) return false;
    } else if (!ReadRanking(b, r)) {
      return false;
    }
  }
  return CheckNoBlankCandidate(*r);
}

bool LineReading::ReadPairwise(Record* r) {
  element c, j;
  std::string chosen, rejected;
  if (!Get(root_, "", L.chosen, true, &c, nullptr) || !TextOf(c, L.chosen.text, &chosen)) return false;
  if (!Get(root_, "", L.rejected, true, &j, nullptr) || !TextOf(j, L.rejected.text, &rejected)) return false;
  r->candidates = {std::move(chosen), std::move(rejected)};
  r->ranks = {1, 2};
  r->chosen = 0;
  return true;
}

bool LineReading::ReadCandidateList(size_t* b_out, Record* r) {
  element arr_e;
  if (!Get(root_, "", L.candidates, true, &arr_e, nullptr)) return false;
  if (arr_e.type() != element_type::ARRAY) {
    return Fail("wrong_type", L.candidates.text, "the candidates at " + L.candidates.text + " are " +
                                                     TypeName(arr_e.type()) + ", not an array");
  }
  simdjson::dom::array arr = arr_e.get_array().value_unsafe();
  const size_t b = arr.size();
  if (b < 2) {
    return Fail("too_few_candidates", L.candidates.text, "the record has " + std::to_string(b) +
                                                             " candidate(s); a comparison needs at least 2");
  }
  if (b > lim.max_candidates) {
    return Fail("too_many_candidates", L.candidates.text, "the record has " + std::to_string(b) +
                                                              " candidates, more than limits.max_candidates = " +
                                                              std::to_string(lim.max_candidates));
  }
  size_t i = 0;
  for (element cand : arr) {
    std::string base = L.candidates.text + "/" + std::to_string(i++);
    element t;
    if (!Get(cand, base, L.candidate_text, true, &t, nullptr)) return false;
    std::string text;
    if (!TextOf(t, Join(base, L.candidate_text), &text)) return false;
    r->candidates.push_back(std::move(text));
    if (L.has_candidate_origin) {
      element o;
      bool present = false;
      if (!Get(cand, base, L.candidate_origin, false, &o, &present)) return false;
      if (present && o.type() == element_type::STRING) {
        r->candidate_origin.emplace_back(o.get_string().value_unsafe());
      } else {
        r->candidate_origin.emplace_back();
      }
    }
  }
  *b_out = b;
  return true;
}

bool LineReading::ReadChoice(size_t b, Record* r) {
  element e;
  if (!Get(root_, "", L.choice, true, &e, nullptr)) return false;
  long long v;
  if (e.type() == element_type::INT64) {
    v = e.get_int64().value_unsafe();
  } else if (e.type() == element_type::UINT64) {
    v = -1;  // far out of range either way
  } else {
    return Fail("wrong_type", L.choice.text, "the choice at " + L.choice.text + " is " + TypeName(e.type()) +
                                                 ", not an integer");
  }
  ++evidence_->judgments;
  if (v == 0) ++evidence_->first_slot;
  if (v == static_cast<long long>(b)) ++evidence_->past_last;
  long long idx = v - L.choice_base;
  if (idx < 0 || idx >= static_cast<long long>(b)) {
    return Fail("choice_out_of_range", L.choice.text,
                "the choice at " + L.choice.text + " is " + std::to_string(v) + "; with " + std::to_string(b) +
                    " candidates and choice_base " + std::to_string(L.choice_base) + " it must be " +
                    std::to_string(L.choice_base) + ".." + std::to_string(static_cast<long long>(b) - 1 + L.choice_base));
  }
  r->chosen = static_cast<int>(idx);
  r->ranks.assign(b, 2);
  r->ranks[idx] = 1;
  return true;
}

// Ranks or an order (JudgmentShape::kRanks, kOrder): read, counted as base
// evidence, turned into ranks (1 = best); the one best candidate is chosen.
bool LineReading::ReadRanking(size_t b, Record* r) {
  element e;
  if (!Get(root_, "", L.ranking, true, &e, nullptr)) return false;
  if (e.type() != element_type::ARRAY) {
    return Fail("wrong_type", L.ranking.text, "the ranking at " + L.ranking.text + " is " + TypeName(e.type()) +
                                                  ", not an array");
  }
  std::vector<long long> vals;
  size_t k = 0;
  simdjson::dom::array ranking = e.get_array().value_unsafe();
  for (element x : ranking) {
    if (x.type() != element_type::INT64) {
      return Fail("bad_ranking", L.ranking.text + "/" + std::to_string(k),
                  "ranking entries must be integers; " + L.ranking.text + "/" + std::to_string(k) + " is " +
                      TypeName(x.type()));
    }
    vals.push_back(x.get_int64().value_unsafe());
    ++k;
  }
  if (vals.size() != b) {
    return Fail("bad_ranking", L.ranking.text, "the ranking has " + std::to_string(vals.size()) +
                                                   " entries for " + std::to_string(b) + " candidates");
  }
  ++evidence_->judgments;
  if (!vals.empty()) {
    const long long lo = *std::min_element(vals.begin(), vals.end());
    const long long hi = *std::max_element(vals.begin(), vals.end());
    if (L.judgment == JudgmentShape::kOrder) {
      if (lo == 0) ++evidence_->first_slot;
      if (hi == static_cast<long long>(b)) ++evidence_->past_last;
    } else {
      if (lo == 0) ++evidence_->best_rank_0;
      if (lo == 1) ++evidence_->best_rank_1;
    }
  }
  if (L.judgment == JudgmentShape::kOrder ? !OrderToRanks(vals, b, r) : !RanksToDense(std::move(vals), r)) {
    return false;
  }
  int top = 0, top_idx = -1;
  for (size_t q = 0; q < b; ++q) {
    if (r->ranks[q] == 1) { ++top; top_idx = static_cast<int>(q); }
  }
  r->chosen = top == 1 ? top_idx : -1;
  return true;
}

// An order lists candidate indexes best first; each exactly once.
bool LineReading::OrderToRanks(const std::vector<long long>& vals, size_t b, Record* r) {
  std::vector<char> seen(b, 0);
  r->ranks.assign(b, 0);
  for (size_t pos = 0; pos < b; ++pos) {
    long long c = vals[pos] - L.choice_base;
    if (c < 0 || c >= static_cast<long long>(b) || seen[c]) {
      return Fail("bad_ranking", L.ranking.text,
                  "an order must list each candidate index " + std::to_string(L.choice_base) + ".." +
                      std::to_string(static_cast<long long>(b) - 1 + L.choice_base) +
                      " exactly once (choice_base " + std::to_string(L.choice_base) + ")");
    }
    seen[c] = 1;
    r->ranks[c] = static_cast<int>(pos) + 1;
  }
  return true;
}

// Ranks: 1 = best. Accepted: dense ranks (1,1,2) and standard competition
// ranks (1,1,3); anything else (no 1, zero, negative, gaps not explained by
// ties) is not a ranking.
bool LineReading::RanksToDense(std::vector<long long> vals, Record* r) {
  if (L.rank_base == 0) {
    for (auto& v : vals) ++v;  // 0 = best: shift to 1 = best
  }
  std::vector<long long> sorted(vals);
  std::sort(sorted.begin(), sorted.end());
  bool dense = sorted[0] == 1, competition = sorted[0] == 1;
  for (size_t q = 1; q < sorted.size(); ++q) {
    if (sorted[q] != sorted[q - 1]) {
      dense = dense && sorted[q] == sorted[q - 1] + 1;
      competition = competition && sorted[q] == static_cast<long long>(q) + 1;
    }
  }
  if (!dense && !competition) {
    return Fail("bad_ranking", L.ranking.text,
                "the ranks are not a ranking: they must start at 1 and have no gaps except after ties "
                "(dense 1,1,2 or competition 1,1,3)");
  }
  r->ranks = DenseRanks(vals);
  return true;
}

bool LineReading::CheckNoBlankCandidate(const Record& r) {
  for (size_t i = 0; i < r.candidates.size(); ++i) {
    if (IsBlank(r.candidates[i])) {
      std::string where = L.judgment == JudgmentShape::kPairwise ? (i == 0 ? L.chosen.text : L.rejected.text)
                                                                   : L.candidates.text + "/" + std::to_string(i);
      return Fail("empty_candidate", where, "the candidate at " + where + " is empty");
    }
  }
  return true;
}

bool LineReading::ReadMeta(Record* r) {
  if (!OptionalScalar(L.annotator, L.has_annotator, &r->annotator)) return false;
  if (!OptionalScalar(L.thread, L.has_thread, &r->thread)) return false;
  if (!OptionalScalar(L.source, L.has_source, &r->source)) return false;
  if (!OptionalScalar(L.timestamp, L.has_timestamp, &r->timestamp)) return false;
  if (!OptionalScalar(L.group, L.has_group, &r->group)) return false;
  if (L.has_metadata) {
    element e;
    bool present = false;
    if (!Get(root_, "", L.metadata, false, &e, &present)) return false;
    if (present) CollectStrings(e, L.metadata.text, &r->metadata);
  }
  return true;
}

// The reject of a line simdjson cannot parse, or of a value that is not an object.
bool ParseFailure(simdjson::error_code err, const InputLimits& lim, RejectReason* why) {
  auto fail = [&](const char* code, std::string message) {
    why->id.clear();
    why->code = code;
    why->field.clear();
    why->message = std::move(message);
    return false;
  };
  if (err == simdjson::UTF8_ERROR) return fail("invalid_utf8", "the line is not valid UTF-8");
  if (err == simdjson::DEPTH_ERROR) {
    return fail("json_too_deep", "JSON nesting is deeper than the limit of " + std::to_string(lim.max_depth) +
                                     " levels (limits.max_depth)");
  }
  if (err == simdjson::STRING_ERROR) {
    // simdjson refuses escaped lone surrogates ("\ud800" without its low
    // half, a lone "\udc00"): RFC 8259 section 8.2 leaves them undefined.
    return fail("not_json", "the line is not a JSON value: a string has a bad escape (e.g. a lone surrogate "
                            "such as \\ud800 without its pair) or an unescaped control character");
  }
  return fail("not_json", std::string("the line is not a JSON value: ") + simdjson::error_message(err));
}

}  // namespace

static_assert(RecordReader::kPadding >= simdjson::SIMDJSON_PADDING, "the parser reads past a line's end");

bool RecordReader::Read(std::string_view line, const std::string& default_id, Record* rec, RejectReason* why,
                        bool padded) {
  element root;
  auto err = impl_->parser.parse(line.data(), line.size(), /*realloc_if_needed=*/!padded).get(root);
  if (err) return ParseFailure(err, impl_->limits, why);
  LineReading reading(impl_->layout, impl_->limits, &impl_->evidence, root, why);
  if (root.type() != element_type::OBJECT) {
    return reading.Fail("not_an_object", "", std::string("the line is ") + TypeName(root.type()) +
                                                 ", not a JSON object");
  }
  Record r;
  if (!reading.ReadId(default_id, &r) || !reading.ReadPrompt(&r) || !reading.ReadCandidatesAndJudgment(&r) ||
      !reading.ReadMeta(&r)) {
    return false;
  }
  *rec = std::move(r);
  return true;
}

}  // namespace prefsift
