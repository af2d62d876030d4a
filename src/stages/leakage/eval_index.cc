#include "stages/leakage/eval_index.h"

#include <nlohmann/json.hpp>

#include <filesystem>
#include <set>

#include "core/blank.h"
#include "core/json_pointer.h"
#include "core/normalize.h"
#include "core/plan.h"
#include "core/record.h"
#include "io/file_system.h"
#include "io/line_reader.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

std::string Resolve(const std::string& base, const std::string& p) { return ResolvePlanPath(base, p); }

bool EndsWith(const std::string& s, const std::string& e) {
  return s.size() >= e.size() && s.compare(s.size() - e.size(), e.size(), e) == 0;
}

// Evaluates an RFC 6901 pointer; nullptr when the value is absent.
const Json* At(const Json& doc, const JsonPointer& p) {
  const Json* cur = &doc;
  for (const auto& tok : p.tokens) {
    if (cur->is_object()) {
      auto it = cur->find(tok);
      if (it == cur->end()) return nullptr;
      cur = &*it;
    } else if (cur->is_array()) {
      size_t idx = 0;
      if (!ArrayIndexToken(tok, &idx) || idx >= cur->size()) return nullptr;
      cur = &(*cur)[idx];
    } else {
      return nullptr;
    }
  }
  return cur;
}

// The next non-blank line of an evaluation file: false at its end. Errors name
// the file and line.
Result<bool> NextLine(const EvalSetSpec& spec, LineReader& reader, std::string_view* line, uint64_t* no) {
  for (;;) {
    auto next = reader.Read(line, no);
    if (!next.ok()) return Status::Input("evaluation set " + spec.name + ": " + next.status().message());
    if (next.value() == LineReader::Next::kEnd) return false;
    if (next.value() == LineReader::Next::kTooLong) {
      return Status::Input(spec.path + ":" + std::to_string(*no) + ": line longer than the line limit");
    }
    if (!IsBlank(*line)) return true;
  }
}

Status ReadJsonl(const EvalSetSpec& spec, uint32_t set, LineReader& reader, EvalCorpus* out) {
  auto text_ptr = ParseJsonPointer(spec.text_pointer, "text");
  auto ref_ptr = ParseJsonPointer(spec.reference_pointer, "reference");
  auto id_ptr = ParseJsonPointer(spec.id_pointer, "id");
  std::set<std::string> seen;
  std::string_view line;
  uint64_t no = 0;
  for (;;) {
    auto more = NextLine(spec, reader, &line, &no);
    if (!more.ok()) return more.status();
    if (!more.value()) break;
    std::string where = spec.path + ":" + std::to_string(no);
    Json doc = Json::parse(line, nullptr, false);
    if (doc.is_discarded()) return Status::Input(where + ": not valid JSON (evaluation set " + spec.name + ")");
    const Json* t = At(doc, text_ptr.value());
    if (!t || !t->is_string()) {
      return Status::Input(where + ": no string at " + spec.text_pointer + " (evaluation set " + spec.name + ")");
    }
    EvalItem item;
    item.set = set;
    item.line = no;
    item.text = t->get<std::string>();
    if (!spec.reference_pointer.empty()) {
      const Json* r = At(doc, ref_ptr.value());
      if (r && r->is_string()) item.reference = r->get<std::string>();
    }
    if (!spec.id_pointer.empty()) {
      const Json* i = At(doc, id_ptr.value());
      if (!i || !(i->is_string() || i->is_number_integer())) {
        return Status::Input(where + ": no string or integer id at " + spec.id_pointer + " (evaluation set " +
                             spec.name + ")");
      }
      item.id = i->is_string() ? i->get<std::string>() : std::to_string(i->get<long long>());
    } else {
      item.id = std::to_string(no);
    }
    if (!seen.insert(item.id).second) {
      return Status::Input(where + ": item id \"" + item.id + "\" repeats (evaluation set " + spec.name + ")");
    }
    out->items.push_back(std::move(item));
  }
  return Status::Ok();
}

Status ReadText(const EvalSetSpec& spec, uint32_t set, LineReader& reader, EvalCorpus* out) {
  std::string_view line;
  uint64_t no = 0;
  for (;;) {
    auto more = NextLine(spec, reader, &line, &no);
    if (!more.ok()) return more.status();
    if (!more.value()) break;
    if (!IsValidUtf8(line)) return Status::Input(spec.path + ":" + std::to_string(no) + ": not valid UTF-8");
    EvalItem item;
    item.set = set;
    item.line = no;
    item.id = std::to_string(no);
    item.text = std::string(line);
    out->items.push_back(std::move(item));
  }
  return Status::Ok();
}

Status ReadPreference(const EvalSetSpec& spec, uint32_t set, LineReader& reader, const InputLimits& limits,
                      EvalCorpus* out) {
  RecordReader parser(spec.layout, limits);
  std::set<std::string> seen;
  std::string_view line;
  uint64_t no = 0;
  for (;;) {
    auto more = NextLine(spec, reader, &line, &no);
    if (!more.ok()) return more.status();
    if (!more.value()) break;
    std::string where = spec.path + ":" + std::to_string(no);
    Record rec;
    RejectReason why;
    if (!parser.Read(line, spec.name + ":" + std::to_string(no), &rec, &why)) {
      return Status::Input(where + ": " + why.message + " (" + why.code + ", evaluation set " + spec.name + ")");
    }
    EvalItem item;
    item.set = set;
    item.line = no;
    item.id = rec.id;
    item.text = rec.UserPromptText();
    if (rec.chosen >= 0) item.reference = rec.candidates[static_cast<size_t>(rec.chosen)];
    item.thread = rec.thread.value_or("");
    item.annotator = rec.annotator.value_or("");
    item.group = rec.group.value_or("");
    if (!seen.insert(item.id).second) {
      return Status::Input(where + ": record id \"" + item.id + "\" repeats (evaluation set " + spec.name + ")");
    }
    out->items.push_back(std::move(item));
  }
  return Status::Ok();
}

}  // namespace

const char* EvalFormatName(EvalFormat f) {
  switch (f) {
    case EvalFormat::kText: return "text";
    case EvalFormat::kJsonl: return "jsonl";
    case EvalFormat::kPreference: return "preference";
  }
  return "?";
}

Result<std::vector<EvalSetSpec>> ParseEvalSetSpecs(const Json& list, const std::string& base_dir,
                                                   const std::string& where) {
  if (!list.is_array()) return Status::Usage(where + ": must be an array of evaluation sets");
  std::vector<EvalSetSpec> out;
  std::set<std::string> names;
  for (size_t i = 0; i < list.size(); ++i) {
    std::string w = where + "[" + std::to_string(i) + "]";
    const Json& e = list[i];
    if (!e.is_object()) return Status::Usage(w + ": must be an object with \"name\" and \"path\"");
    EvalSetSpec spec;
    std::string format;
    bool has_layout = false;
    for (auto it = e.begin(); it != e.end(); ++it) {
      const std::string& k = it.key();
      if (k == "layout") {
        auto layout = LayoutFromJson(it.value(), w + ".layout");
        if (!layout.ok()) return layout.status();
        spec.layout = std::move(layout).value();
        has_layout = true;
        continue;
      }
      if (k != "name" && k != "path" && k != "format" && k != "text" && k != "reference" && k != "id") {
        return Status::Usage(w + ": unknown key \"" + k + "\" (known: name, path, format, text, reference, id, layout)");
      }
      if (!it.value().is_string()) return Status::Usage(w + "." + k + ": must be a string");
      std::string v = it.value().get<std::string>();
      if (k == "name") spec.name = v;
      else if (k == "path") spec.path = Resolve(base_dir, v);
      else if (k == "format") format = v;
      else {
        auto p = ParseJsonPointer(v, w + "." + k);
        if (!p.ok()) return p.status();
        (k == "text" ? spec.text_pointer : k == "reference" ? spec.reference_pointer : spec.id_pointer) = v;
      }
    }
    if (spec.name.empty()) return Status::Usage(w + ".name: required (a short name used in reports)");
    if (spec.path.empty()) return Status::Usage(w + ".path: required");
    if (!names.insert(spec.name).second) return Status::Usage(w + ".name: \"" + spec.name + "\" is used twice");
    if (format.empty()) {
      if (has_layout) format = "preference";
      else if (!spec.text_pointer.empty()) format = "jsonl";
      else if (EndsWith(spec.path, ".txt") || EndsWith(spec.path, ".txt.gz") || EndsWith(spec.path, ".txt.zst"))
        format = "text";
      else
        return Status::Usage(w + ".format: required here (\"text\", \"jsonl\" or \"preference\")");
    }
    if (format == "text") spec.format = EvalFormat::kText;
    else if (format == "jsonl") spec.format = EvalFormat::kJsonl;
    else if (format == "preference") spec.format = EvalFormat::kPreference;
    else return Status::Usage(w + ".format: must be \"text\", \"jsonl\" or \"preference\", not \"" + format + "\"");
    if (spec.format == EvalFormat::kJsonl && spec.text_pointer.empty()) {
      return Status::Usage(w + ".text: a jsonl evaluation set needs a JSON Pointer to the prompt, e.g. \"/question\"");
    }
    if (spec.format == EvalFormat::kPreference && !has_layout) {
      return Status::Usage(w + ".layout: a preference evaluation set needs a layout, e.g. {\"preset\": \"pairwise\"}");
    }
    if (spec.format != EvalFormat::kJsonl &&
        (!spec.text_pointer.empty() || !spec.reference_pointer.empty() || !spec.id_pointer.empty())) {
      return Status::Usage(w + ": \"text\", \"reference\" and \"id\" apply to the jsonl format only");
    }
    if (spec.format != EvalFormat::kPreference && has_layout) {
      return Status::Usage(w + ".layout: applies to the preference format only");
    }
    out.push_back(std::move(spec));
  }
  return out;
}

Result<EvalCorpus> LoadEvalSets(const std::vector<EvalSetSpec>& specs, FileSystem* fs, const InputLimits& limits) {
  EvalCorpus corpus;
  for (uint32_t s = 0; s < specs.size(); ++s) {
    const EvalSetSpec& spec = specs[s];
    auto opened = LineReader::Open(fs, spec.path, limits.max_line_bytes);
    if (!opened.ok()) {
      return Status::Input("evaluation set " + spec.name + ": cannot read " + spec.path + ": " +
                           opened.status().message());
    }
    size_t before = corpus.items.size();
    Status st = spec.format == EvalFormat::kText    ? ReadText(spec, s, *opened.value(), &corpus)
                : spec.format == EvalFormat::kJsonl ? ReadJsonl(spec, s, *opened.value(), &corpus)
                                                    : ReadPreference(spec, s, *opened.value(), limits, &corpus);
    if (!st.ok()) return st.code() == StatusCode::kInput ? st : Status::Input(st.message());
    EvalSetInfo info;
    info.spec = spec;
    info.items = corpus.items.size() - before;
    for (size_t i = before; i < corpus.items.size(); ++i) info.with_reference += !corpus.items[i].reference.empty();
    corpus.sets.push_back(std::move(info));
  }
  return corpus;
}

}  // namespace prefsift
