// RE2::Set based scanner. See screener.h for the method and thread-safety.
#include "screen/screener.h"

#include <algorithm>
#include <cstdint>
#include <limits>

#include <re2/re2.h>
#include <re2/set.h>
#include <utf8proc.h>

#include "screen/actions.h"
#include "screen/validators.h"

namespace prefsift::screen {

namespace {

// A span of one rule that passed its checks, before overlaps are resolved.
struct Candidate {
  size_t begin, end;
  int rule;
  double confidence;
};

}  // namespace

struct Screener::Impl {
  struct Compiled {
    Rule rule;
    std::unique_ptr<RE2> re;
    ValidatorFn validator = nullptr;
    bool group_span = false;  // the shape has a capture group: group 1 is the span
  };
  std::vector<Compiled> rules;
  // The Set of each field kind holds all its rules, "beside" ones too: the
  // Set then says whether a "beside" rule matches at all, which is cheaper
  // than running it next to every kept finding (measured: leaving them out
  // of the Set saved ~5% of the Set pass on help-desk text but cost ~8% on
  // text where names are rare).
  std::unique_ptr<RE2::Set> sets[kFieldKindCount];
  std::vector<int> set_to_rule[kFieldKindCount];
  std::vector<int> all_rules[kFieldKindCount];  // every rule of the field kind, in load order
  double certainty_floor = 0.0;

  // `stop_after`: matches starting after it are not wanted (default: all).
  void CollectRule(int rule, std::string_view text, std::vector<Candidate>* cands,
                   std::vector<Candidate>* beside_cands,
                   size_t stop_after = std::numeric_limits<size_t>::max()) const;
  // The candidates of rules without "beside" that survive overlap resolution,
  // in overlap order.
  std::vector<Candidate> KeepFirst(std::vector<Candidate> cands) const;
  // Adds the "beside" candidates that may stay next to the first `kept`.
  void KeepBeside(std::vector<Candidate> beside_cands, std::vector<Candidate>* kept) const;
  std::vector<Finding> MakeFindings(std::string_view text, FieldKind field, std::vector<Candidate> kept) const;
  std::vector<Finding> Resolve(std::string_view text, FieldKind field, std::vector<Candidate> cands,
                               std::vector<Candidate> beside_cands) const;
  // Can "beside" rule `rule` keep anything next to the first-stage `kept`?
  // If so, *stop_after is the last byte at which its span may start and
  // still be within reach of a kept finding of a kind it lists.
  bool BesideLimit(int rule, const std::vector<Candidate>& kept, size_t* stop_after) const;
};

namespace {

bool IsAsciiAlnum(unsigned char c) {
  return (c >= '0' && c <= '9') || (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z');
}

// Does the code point block a match edge? See screener.h.
bool BlocksEdge(int32_t cp) {
  utf8proc_category_t cat = static_cast<utf8proc_category_t>(utf8proc_category(cp));
  if (cat == UTF8PROC_CATEGORY_ND) return true;
  bool letter = cat == UTF8PROC_CATEGORY_LU || cat == UTF8PROC_CATEGORY_LL ||
                cat == UTF8PROC_CATEGORY_LT || cat == UTF8PROC_CATEGORY_LM ||
                cat == UTF8PROC_CATEGORY_LO || cat == UTF8PROC_CATEGORY_MN;
  if (!letter) return false;
  return cp < 0x0590 || (cp >= 0x1E00 && cp <= 0x1FFF) || (cp >= 0xFF21 && cp <= 0xFF5A);
}

int32_t CodePointBefore(std::string_view t, size_t pos) {
  size_t s = pos;
  while (s > 0 && pos - s < 4) {
    --s;
    if ((static_cast<unsigned char>(t[s]) & 0xC0) != 0x80) break;
  }
  int32_t cp = -1;
  utf8proc_iterate(reinterpret_cast<const uint8_t*>(t.data() + s), static_cast<utf8proc_ssize_t>(pos - s), &cp);
  return cp;
}

int32_t CodePointAt(std::string_view t, size_t pos) {
  int32_t cp = -1;
  size_t n = std::min<size_t>(4, t.size() - pos);
  utf8proc_iterate(reinterpret_cast<const uint8_t*>(t.data() + pos), static_cast<utf8proc_ssize_t>(n), &cp);
  return cp;
}

bool NonAsciiNeighbourBlocks(std::string_view t, size_t b, size_t e) {
  if (b > 0 && static_cast<unsigned char>(t[b - 1]) >= 0x80 && IsAsciiAlnum(static_cast<unsigned char>(t[b]))) {
    int32_t cp = CodePointBefore(t, b);
    if (cp >= 0 && BlocksEdge(cp)) return true;
  }
  if (e < t.size() && static_cast<unsigned char>(t[e]) >= 0x80 &&
      IsAsciiAlnum(static_cast<unsigned char>(t[e - 1]))) {
    int32_t cp = CodePointAt(t, e);
    if (cp >= 0 && BlocksEdge(cp)) return true;
  }
  return false;
}

// A context word counts where it starts a word: the byte before it is not an
// ASCII letter (so "tel" is found in "Tel.:" and "Telefonnummer" but not in
// "hotel").
bool AnyWordIn(const std::string& haystack_lower, const std::vector<std::string>& words) {
  for (const std::string& w : words) {
    size_t p = 0;
    while ((p = haystack_lower.find(w, p)) != std::string::npos) {
      if (p == 0 || !(haystack_lower[p - 1] >= 'a' && haystack_lower[p - 1] <= 'z')) return true;
      ++p;
    }
  }
  return false;
}

// Returns false if the finding is vetoed or lacks a word it needs; else sets *conf.
bool ApplyNearby(const NearbyWords& c, std::string_view t, size_t b, size_t e, double base, double* conf) {
  *conf = base;
  if (c.raise_with.empty() && c.only_with.empty() && c.never_with.empty()) return true;
  size_t w = static_cast<size_t>(c.reach);
  size_t lo = b > w ? b - w : 0;
  size_t hi = std::min(t.size(), e + w);
  std::string around;
  around.reserve((b - lo) + (hi - e) + 1);
  around.append(t.substr(lo, b - lo));
  around.push_back('\n');  // so no word spans the value
  around.append(t.substr(e, hi - e));
  for (char& ch : around) {
    if (ch >= 'A' && ch <= 'Z') ch = static_cast<char>(ch - 'A' + 'a');
  }
  if (!c.never_with.empty() && AnyWordIn(around, c.never_with)) return false;
  if (!c.only_with.empty() && !AnyWordIn(around, c.only_with)) return false;
  if (!c.raise_with.empty() && AnyWordIn(around, c.raise_with)) {
    *conf = std::clamp(base + c.raise_by, 0.0, 1.0);
  }
  return true;
}

// Is any word of the span (split at spaces, line breaks, hyphens and
// apostrophes), ASCII-lower-cased, one of `words`?
bool AnySpanWordIn(std::string_view span, const std::vector<std::string>& words) {
  size_t i = 0;
  while (i < span.size()) {
    size_t j = i;
    while (j < span.size() && span[j] != ' ' && span[j] != '\n' && span[j] != '\t' && span[j] != '-' &&
           span[j] != '\'') {
      ++j;
    }
    std::string w(span.substr(i, j - i));
    for (char& ch : w) {
      if (ch >= 'A' && ch <= 'Z') ch = static_cast<char>(ch - 'A' + 'a');
    }
    if (!w.empty() && std::find(words.begin(), words.end(), w) != words.end()) return true;
    i = j + 1;
  }
  return false;
}

// The span's first word (up to a space or hyphen, or the whole span), ASCII-lower-cased.
std::string FirstWord(std::string_view span) {
  size_t n = 0;
  while (n < span.size() && span[n] != ' ' && span[n] != '\n' && span[n] != '\t' && span[n] != '-') ++n;
  std::string w(span.substr(0, n));
  for (char& c : w) {
    if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
  }
  return w;
}

}  // namespace

Result<Screener> Screener::Build(const RuleSet& rules, const ScreenerOptions& options) {
  auto impl = std::make_shared<Impl>();
  impl->certainty_floor = options.certainty_floor;
  RE2::Options ro;
  ro.set_log_errors(false);
  ro.set_max_mem(options.rule_max_mem);
  RE2::Options so;
  so.set_log_errors(false);
  so.set_max_mem(options.set_max_mem);
  for (int f = 0; f < kFieldKindCount; ++f) impl->sets[f] = std::make_unique<RE2::Set>(so, RE2::UNANCHORED);

  for (const Rule& r : rules.rules) {
    const std::string where = r.source_file + ":" + std::to_string(r.source_line) + ": rule '" + r.id + "': ";
    Impl::Compiled c;
    c.rule = r;
    c.re = std::make_unique<RE2>(r.shape, ro);
    if (!c.re->ok()) return Status::Usage(where + "bad shape: " + c.re->error());
    c.group_span = c.re->NumberOfCapturingGroups() >= 1;
    if (!r.check.empty()) {
      c.validator = FindValidator(r.check);
      if (c.validator == nullptr) return Status::Usage(where + "unknown check '" + r.check + "'");
    }
    int idx = static_cast<int>(impl->rules.size());
    for (int f = 0; f < kFieldKindCount; ++f) {
      if (!r.fields[f]) continue;
      impl->all_rules[f].push_back(idx);
      std::string err;
      int id = impl->sets[f]->Add(r.shape, &err);
      if (id < 0) return Status::Usage(where + "bad shape: " + err);
      impl->set_to_rule[f].push_back(idx);
    }
    impl->rules.push_back(std::move(c));
  }
  for (int f = 0; f < kFieldKindCount; ++f) {
    if (impl->set_to_rule[f].empty()) {
      impl->sets[f].reset();
      continue;
    }
    if (!impl->sets[f]->Compile()) {
      return Status::Internal("cannot compile the rule set for field kind '" +
                              std::string(FieldKindName(static_cast<FieldKind>(f))) +
                              "': out of memory (raise the set memory budget)");
    }
  }
  return Screener(std::move(impl));
}

size_t Screener::rule_count() const { return impl_->rules.size(); }

namespace {

// The overlap order: certainty after nearby words, length, rule order, start.
bool BeforeInOverlapOrder(const Candidate& x, const Candidate& y) {
  if (x.confidence != y.confidence) return x.confidence > y.confidence;
  if (x.end - x.begin != y.end - y.begin) return x.end - x.begin > y.end - y.begin;
  if (x.rule != y.rule) return x.rule < y.rule;
  return x.begin < y.begin;
}

bool OverlapsAny(const Candidate& c, const std::vector<Candidate>& kept) {
  for (const Candidate& k : kept) {
    if (c.begin < k.end && k.begin < c.end) return true;
  }
  return false;
}

}  // namespace

// Every span of rule `ri` in the text that passes its edges, check, span words,
// nearby words and the certainty floor: into *cands, or *beside_cands for a
// rule with "beside". Matches are found left to right, each search starting
// where the last match ended, so a caller that wants only the spans starting
// up to `stop_after` gets exactly those the whole loop would give.
void Screener::Impl::CollectRule(int ri, std::string_view text, std::vector<Candidate>* cands,
                                 std::vector<Candidate>* beside_cands, size_t stop_after) const {
  const Compiled& c = rules[static_cast<size_t>(ri)];
  size_t pos = 0;
  re2::StringPiece m[2];
  const int nsub = c.group_span ? 2 : 1;
  while (pos <= text.size() && c.re->Match(text, pos, text.size(), RE2::UNANCHORED, m, nsub)) {
    size_t b = static_cast<size_t>(m[0].data() - text.data());
    size_t e = b + m[0].size();
    if (b > stop_after) break;  // every later span starts later still
    if (e == b) {  // empty match: step one byte
      pos = b + 1;
      continue;
    }
    pos = e;
    if (c.group_span) {  // the span is group 1; the rest of the match is the signal around it
      if (m[1].data() == nullptr || m[1].empty()) continue;
      b = static_cast<size_t>(m[1].data() - text.data());
      e = b + m[1].size();
    }
    if (NonAsciiNeighbourBlocks(text, b, e)) continue;
    if (c.validator != nullptr) {
      size_t e2 = e;
      if (!c.validator(text, b, &e2)) continue;
      if (e2 > b && e2 < e) {
        e = e2;
        pos = e2;
      }
    }
    double conf;
    if (c.rule.first_word_in && !c.rule.first_word_in->count(FirstWord(text.substr(b, e - b)))) continue;
    if (!c.rule.not_in_span.empty() && AnySpanWordIn(text.substr(b, e - b), c.rule.not_in_span)) continue;
    if (!ApplyNearby(c.rule.nearby, text, b, e, c.rule.certainty, &conf)) continue;
    if (conf < certainty_floor) continue;
    (c.rule.beside.empty() ? cands : beside_cands)->push_back({b, e, ri, conf});
  }
}

std::vector<Candidate> Screener::Impl::KeepFirst(std::vector<Candidate> cands) const {
  std::sort(cands.begin(), cands.end(), BeforeInOverlapOrder);
  std::vector<Candidate> kept;
  for (const Candidate& c : cands) {
    if (!OverlapsAny(c, kept)) kept.push_back(c);
  }
  return kept;
}

// Rules with "beside": kept only next to a kept finding of a listed kind, and
// only where they overlap nothing already kept (so the order among them is
// the same overlap order).
void Screener::Impl::KeepBeside(std::vector<Candidate> beside_cands, std::vector<Candidate>* kept_out) const {
  if (beside_cands.empty()) return;
  std::vector<Candidate>& kept = *kept_out;
  std::sort(beside_cands.begin(), beside_cands.end(), BeforeInOverlapOrder);
  const size_t n_first = kept.size();
  for (const Candidate& c : beside_cands) {
    const Rule& r = rules[static_cast<size_t>(c.rule)].rule;
    const size_t reach = static_cast<size_t>(r.nearby.reach);
    bool near = false, overlaps = false;
    for (size_t i = 0; i < kept.size(); ++i) {
      const Candidate& k = kept[i];
      if (c.begin < k.end && k.begin < c.end) {
        overlaps = true;
        break;
      }
      if (i >= n_first) continue;
      const std::string& kind = rules[static_cast<size_t>(k.rule)].rule.kind;
      size_t gap = k.begin >= c.end ? k.begin - c.end : c.begin - k.end;
      if (gap <= reach && std::find(r.beside.begin(), r.beside.end(), kind) != r.beside.end()) near = true;
    }
    if (near && !overlaps) kept.push_back(c);
  }
}

// A span starting after every listed kept finding's end + reach is more than
// reach bytes from all of them (KeepBeside's gap), so it cannot stay.
bool Screener::Impl::BesideLimit(int ri, const std::vector<Candidate>& kept, size_t* stop_after) const {
  const Rule& r = rules[static_cast<size_t>(ri)].rule;
  const size_t reach = static_cast<size_t>(r.nearby.reach);
  bool any = false;
  size_t limit = 0;
  for (const Candidate& k : kept) {
    const std::string& kind = rules[static_cast<size_t>(k.rule)].rule.kind;
    if (std::find(r.beside.begin(), r.beside.end(), kind) == r.beside.end()) continue;
    any = true;
    limit = std::max(limit, k.end + reach);
  }
  *stop_after = limit;
  return any;
}

// The findings of the kept candidates, sorted by begin.
std::vector<Finding> Screener::Impl::MakeFindings(std::string_view text, FieldKind field,
                                                  std::vector<Candidate> kept) const {
  std::vector<Finding> out;
  if (kept.empty()) return out;
  std::sort(kept.begin(), kept.end(), [](const Candidate& x, const Candidate& y) { return x.begin < y.begin; });
  out.reserve(kept.size());
  for (const Candidate& k : kept) {
    const Rule& r = rules[static_cast<size_t>(k.rule)].rule;
    Finding fd;
    fd.rule_id = r.id;
    fd.field = field;
    fd.begin = k.begin;
    fd.end = k.end;
    fd.action = r.action;
    fd.certainty = k.confidence;
    fd.kind = r.kind;
    fd.preview = MaskedPreview(text.substr(k.begin, k.end - k.begin));
    out.push_back(std::move(fd));
  }
  return out;
}

// Resolves overlaps among the candidates (screener.h) and makes the findings,
// sorted by begin.
std::vector<Finding> Screener::Impl::Resolve(std::string_view text, FieldKind field, std::vector<Candidate> cands,
                                             std::vector<Candidate> beside_cands) const {
  if (cands.empty() && beside_cands.empty()) return {};
  std::vector<Candidate> kept = KeepFirst(std::move(cands));
  KeepBeside(std::move(beside_cands), &kept);
  return MakeFindings(text, field, std::move(kept));
}

Result<std::vector<Finding>> Screener::Scan(std::string_view text, FieldKind field) const {
  const int f = static_cast<int>(field);
  const RE2::Set* set = impl_->sets[f].get();
  if (set == nullptr || text.empty()) return std::vector<Finding>{};

  // The one pass over the text: which rules match anywhere.
  std::vector<int> hits;
  RE2::Set::ErrorInfo info;
  info.kind = RE2::Set::kNoError;
  if (!set->Match(text, &hits, &info)) {
    if (info.kind != RE2::Set::kNoError) {
      return Status::Internal(info.kind == RE2::Set::kOutOfMemory
                                  ? "personal-data screen: regex engine ran out of memory (text of " +
                                        std::to_string(text.size()) + " bytes); raise the set memory budget"
                                  : "personal-data screen: regex engine failed");
    }
    return std::vector<Finding>{};
  }
  std::sort(hits.begin(), hits.end());
  std::vector<Candidate> cands, beside_cands;
  size_t n_beside = 0;
  for (int h : hits) {
    const int ri = impl_->set_to_rule[f][static_cast<size_t>(h)];
    if (impl_->rules[static_cast<size_t>(ri)].rule.beside.empty()) {
      impl_->CollectRule(ri, text, &cands, &beside_cands);
    } else {
      hits[n_beside++] = ri;  // the reported "beside" rules, in load order, for after the others
    }
  }
  std::vector<Candidate> kept = impl_->KeepFirst(std::move(cands));
  if (kept.empty()) return std::vector<Finding>{};
  // Only now the reported "beside" rules: a span of one is kept only within
  // reach of a kept finding of a kind it lists (KeepBeside), so each runs
  // only if such a finding exists, and only as far as one can reach. On
  // help-desk text the two-capitalised-words rule is reported for most
  // texts and running it over all of them took about as long as the Set.
  for (size_t i = 0; i < n_beside; ++i) {
    size_t stop_after = 0;
    if (impl_->BesideLimit(hits[i], kept, &stop_after)) {
      impl_->CollectRule(hits[i], text, &cands, &beside_cands, stop_after);
    }
  }
  impl_->KeepBeside(std::move(beside_cands), &kept);
  return impl_->MakeFindings(text, field, std::move(kept));
}

std::vector<Finding> Screener::ScanEachRule(std::string_view text, FieldKind field) const {
  const int f = static_cast<int>(field);
  if (text.empty()) return {};
  std::vector<Candidate> cands, beside_cands;
  for (int ri : impl_->all_rules[f]) impl_->CollectRule(ri, text, &cands, &beside_cands);
  return impl_->Resolve(text, field, std::move(cands), std::move(beside_cands));
}

}  // namespace prefsift::screen
