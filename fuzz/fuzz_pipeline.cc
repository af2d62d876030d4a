// Fuzz target: the whole pipeline on one or two input files made of the fuzz
// bytes, every stage on (exact, near, leakage with a small evaluation set,
// screen with the repository's rule packs, bias, split), outputs written.
//
// Input: byte 0 and byte 1 choose the layouts and settings (below), the rest
// is the input file (at most kMaxInput bytes). With bit 3 of byte 0 the file is
// cut in two at a line break and the second part is read with a second layout.
//
// Inputs and outputs live in a MemoryFileSystem (src/io/memory_file_system.h).
// The stages read the evaluation sets and rule packs through the run's file
// system too: the evaluation sets are written once to a per-process temporary
// folder (removed at exit), the rule packs are the source tree's rules/
// (PREFSIFT_FUZZ_RULES_DIR), and both are copied into the in-memory file
// system at their real paths before each execution (MirrorReadOnlyFiles).
//
// Properties checked on every input:
//  - RunPipeline returns an outcome or an error value; never a crash, an
//    exception, a sanitizer report, or an "internal" error (the pipeline's own
//    ledger check reports an unbalanced ledger as internal);
//  - a failed run leaves no ".partial-" staging folder behind;
//  - after a successful run, every non-blank input line is in exactly one
//    output: records read = non-blank lines counted here independently, and
//    lines in the split files + lines in rejects.jsonl = records read;
//  - every line of rejects.jsonl parses as a JSON object with a reason, a known
//    file and a line number of a non-blank line, each (file, line) at most once,
//    and the record kept losslessly (record, record_text or record_base64, or
//    record_omitted for a line over the length limit);
//  - when no stage may rewrite records (no mask/pseudonymise/drop action, no
//    position rebalancing), the kept lines are the input lines byte for byte:
//    kept lines + rejected lines = the non-blank input lines, as multisets,
//    and each reject's record equals the input line at its (file, line);
//  - summary.json parses as JSON;
//  - with bits 3 and 4 of byte 1, the run is repeated with the other thread count and
//    the record outputs (split files, rejects.jsonl) must be byte-identical.
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/plan.h"
#include "io/memory_file_system.h"
#include "pipeline/pipeline.h"

#ifndef PREFSIFT_FUZZ_RULES_DIR
#error "PREFSIFT_FUZZ_RULES_DIR must name the source tree's rules/ folder"
#endif

namespace {

using Json = nlohmann::ordered_json;
using prefsift::MemoryFileSystem;

constexpr size_t kMaxInput = 16 * 1024;  // bytes of input file; more is ignored (libFuzzer -max_len is lower)
const char* const kMem = "/fuzzmem";
const char* const kOut = "/fuzzmem/out";
const char* const kKeyEnv = "PREFSIFT_FUZZ_PSEUDONYM_KEY";

[[noreturn]] void Fail(const std::string& what) {
  std::fprintf(stderr, "fuzz_pipeline: property violated: %s\n", what.c_str());
  std::fflush(stderr);
  std::abort();
}

// The evaluation sets: a text file of prompts and a JSONL file with reference
// answers, in a scenario of our own (a community tool-lending shed).
std::string& TempDir() {
  static std::string dir;
  return dir;
}

void RemoveTempDir() {
  std::error_code ec;
  if (!TempDir().empty()) std::filesystem::remove_all(TempDir(), ec);
}

void SetUpOnce() {
  std::string dir = "/tmp/prefsift-fuzz-pipeline-" + std::to_string(::getpid());
  std::error_code ec;
  std::filesystem::create_directories(dir, ec);
  if (ec) Fail("cannot create " + dir);
  TempDir() = dir;
  std::atexit(RemoveTempDir);
  std::ofstream(dir + "/heldout.txt", std::ios::binary)
      << "How long may a member keep the tile cutter from the Elm Street tool shed before it is due back?\n"
         "Which ladder should a volunteer lend for clearing gutters on a two storey terrace house?\n"
         "what oil goes in the shed's lawnmower\n";
  std::ofstream(dir + "/staff.jsonl", std::ios::binary)
      << R"({"qid":"s1","question":"A member returns the hedge trimmer with a blunt blade. What should the desk volunteer do first?","reference":"Log the return, tag the trimmer as needing sharpening and move it to the repair shelf before lending it again."})"
      << "\n"
      << R"({"qid":"s2","question":"Can the pressure washer be lent out in freezing weather?","reference":"No: water left in the pump can freeze and crack it, so the shed keeps it in until the frost has passed."})"
      << "\n";
  ::setenv(kKeyEnv, "tool-shed-fuzz-key-not-a-secret-0123456789", 1);
}

// The stages read through the run's file system: the evaluation sets and the
// rule packs are copied into the in-memory one at their real paths (read from
// disk once).
void MirrorReadOnlyFiles(MemoryFileSystem& fs) {
  static const std::vector<std::pair<std::string, std::string>> files = [] {
    std::vector<std::pair<std::string, std::string>> out;
    std::vector<std::string> paths = {TempDir() + "/heldout.txt", TempDir() + "/staff.jsonl"};
    std::error_code ec;
    for (std::filesystem::recursive_directory_iterator it(PREFSIFT_FUZZ_RULES_DIR, ec), end; !ec && it != end;
         it.increment(ec)) {
      if (it->is_regular_file(ec)) paths.push_back(it->path().string());
    }
    for (const auto& p : paths) {
      std::ifstream in(p, std::ios::binary);
      out.emplace_back(p, std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>()));
    }
    return out;
  }();
  for (const auto& [path, bytes] : files) fs.Put(path, bytes);
}

Json LayoutSpec(int which) {
  switch (which % 6) {
    case 0:
      return Json{{"preset", "choice"}, {"annotator", "/who"}, {"source", "/src"}, {"thread", "/thread"},
                  {"metadata", "/meta"}};
    case 1: return Json{{"preset", "ranked"}, {"group", "/g"}};
    case 2: return Json{{"preset", "pairwise"}, {"annotator", "/who"}, {"source", "/src"}};
    case 3:
      return Json{{"id", "/k"}, {"prompt", "/turns"}, {"candidates", "/answers"}, {"candidate_text", "/body"},
                  {"candidate_origin", "/model"}, {"order", "/order"}, {"annotator", "/who"}, {"metadata", "/meta"}};
    case 4: return Json{{"preset", "choice"}, {"choice_base", 1}};
    default: return Json{{"preset", "ordered"}, {"timestamp", "/ts"}};
  }
}

struct Options {
  int layout0 = 0, layout1 = 0;
  bool two_inputs = false;
  unsigned threads = 1;
  bool rewrite_actions = false;  // screen actions that change or drop records
  bool pseudonymise = false;
  bool position_rebalance = false, length_rebalance = false;
  bool tight_limits = false;
  int conflicts = 0;             // keep-majority, drop-all, keep-all
  bool near_reject = false, near_cap = false, near_exact = false;
  bool leak_flag = false;
  bool stratify = false;
  bool repeat_other_threads = false;
  size_t cut = 0;                // where the second input starts (two_inputs)
};

Options Decode(uint8_t b0, uint8_t b1) {
  Options o;
  o.layout0 = b0 & 0x07;
  o.two_inputs = b0 & 0x08;
  o.threads = (b0 & 0x10) ? 2 : 1;
  o.rewrite_actions = b0 & 0x20;
  o.position_rebalance = (b0 & 0x40) && (b1 & 0x01);
  o.length_rebalance = (b0 & 0x40) && (b1 & 0x02);
  o.tight_limits = b0 & 0x80;
  o.layout1 = (o.layout0 + 1 + (b1 >> 5)) % 6;
  o.pseudonymise = o.rewrite_actions && (b1 & 0x01);
  o.conflicts = (b1 >> 1) % 3;
  o.near_reject = b1 & 0x04;
  o.near_cap = b1 & 0x08;
  o.repeat_other_threads = (b1 & 0x18) == 0x18;  // one input in four: it doubles the cost
  o.near_exact = b1 & 0x20;
  o.leak_flag = b1 & 0x40;
  o.stratify = b1 & 0x80;
  return o;
}

prefsift::Plan MakePlan(const Options& o, const std::vector<std::string>& paths) {
  prefsift::Plan plan;
  for (size_t i = 0; i < paths.size(); ++i) {
    prefsift::Status s = prefsift::AddInput(&plan, paths[i], LayoutSpec(i == 0 ? o.layout0 : o.layout1), "fuzz");
    if (!s.ok()) Fail("fuzz layout rejected: " + s.message());
  }
  plan.output = kOut;
  plan.overwrite = false;
  plan.seed = 7;
  plan.threads = o.threads;
  if (o.tight_limits) {
    plan.limits.max_line_bytes = 512;
    plan.limits.max_depth = 8;
    plan.limits.max_candidates = 4;
    plan.limits.max_text_bytes = 96;
  }
  const char* conflicts[] = {"keep-majority", "drop-all", "keep-all"};
  plan.stages["exact"] = Json{{"conflicts", conflicts[o.conflicts]}};
  plan.stages["near"] = Json{{"threshold", 0.5},       {"word_ngram", 2},
                             {"slots", 64},            {"verify", o.near_exact ? "exact" : "estimate"},
                             {"max_per_cluster", o.near_cap ? 1 : 0},
                             {"candidates", o.near_reject ? "reject" : "flag"}};
  const std::string& dir = TempDir();
  const char* policy = o.leak_flag ? "flag" : "drop";
  plan.stages["leakage"] = Json{
      {"eval_sets", Json::array({Json{{"name", "heldout"}, {"path", dir + "/heldout.txt"}},
                                 Json{{"name", "staff"}, {"path", dir + "/staff.jsonl"}, {"text", "/question"},
                                      {"reference", "/reference"}, {"id", "/qid"}}})},
      {"exact", Json{{"policy", policy}}},
      {"ngram", Json{{"policy", policy}, {"n", 4}}},
      {"near", Json{{"policy", policy}}},
      {"answers", Json{{"policy", policy}}}};
  Json screen = Json{{"rules_dir", PREFSIFT_FUZZ_RULES_DIR}};
  if (o.rewrite_actions) {
    screen["action"] = "mask";
    screen["actions"] = Json{{"secret.pem_private_key", "drop"}};
    if (o.pseudonymise) {
      screen["actions"]["contact.email"] = "pseudonymise";
      screen["key_env"] = kKeyEnv;
    }
  } else {
    screen["action"] = "flag";
  }
  plan.stages["screen"] = screen;
  plan.stages["bias"] = Json{{"min_group_records", 2},
                             {"position", Json{{"rebalance", o.position_rebalance}}},
                             {"length", Json{{"rebalance", o.length_rebalance}}},
                             {"shortcut_audit", Json{{"folds", 2}, {"min_records", 4}}}};
  plan.stages["split"] = Json{{"splits", Json{{"train", 0.6}, {"valid", 0.2}, {"test", 0.2}}},
                              {"tie_by", Json::array({"prompt", "near", "thread", "group"})},
                              {"stratify_by", o.stratify ? "source" : "none"}};
  plan.gate = Json{{"min_kept_share", 0.5},           {"max_label_conflict_rate", 0.1},
                   {"max_leakage_rate", 0.0},         {"max_personal_data_findings", 0},
                   {"min_position_p_adjusted", 0.01}, {"max_shortcut_accuracy", 0.6},
                   {"require_split_checks", true}};
  return plan;
}

bool IsBlank(std::string_view s) {
  return std::all_of(s.begin(), s.end(), [](char c) { return c == ' ' || c == '\t' || c == '\r'; });
}

bool LooksCompressed(std::string_view s) {
  return (s.size() >= 2 && static_cast<uint8_t>(s[0]) == 0x1f && static_cast<uint8_t>(s[1]) == 0x8b) ||
         (s.size() >= 4 && s.compare(0, 4, "\x28\xb5\x2f\xfd") == 0);
}

// The records of a plain file (its non-blank lines), by 1-based line number,
// as src/io/line_reader.cc gives them: split at LF, a trailing CR removed, a
// byte-order mark at the start of line 1 removed, a last line without LF still
// a line; a line longer than max_line (more than max_line + 1 bytes before the
// CR is removed, or more than max_line after) is a record too, never blank.
std::map<uint64_t, std::string> Records(std::string_view file, size_t max_line) {
  std::map<uint64_t, std::string> out;
  uint64_t no = 0;
  size_t pos = 0;
  while (pos < file.size()) {
    size_t nl = file.find('\n', pos);
    bool has_nl = nl != std::string_view::npos;
    std::string_view line = file.substr(pos, has_nl ? nl - pos : std::string_view::npos);
    pos = has_nl ? nl + 1 : file.size();
    ++no;
    const size_t raw_len = line.size();
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if (no == 1 && line.size() >= 3 && line.compare(0, 3, "\xEF\xBB\xBF") == 0) line.remove_prefix(3);
    const bool too_long = raw_len > max_line + 1 || line.size() > max_line;
    if (too_long || !IsBlank(line)) out.emplace(no, std::string(line));
  }
  return out;
}

std::vector<std::string> Lines(const std::string& bytes, const std::string& name) {
  std::vector<std::string> out;
  if (bytes.empty()) return out;
  if (bytes.back() != '\n') Fail(name + " does not end with a line break");
  size_t pos = 0;
  while (pos < bytes.size()) {
    size_t nl = bytes.find('\n', pos);
    out.push_back(bytes.substr(pos, nl - pos));
    pos = nl + 1;
  }
  return out;
}

std::string Base64Decode(const std::string& in) {
  static const std::string kAlphabet = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  uint32_t acc = 0;
  int bits = 0;
  for (char c : in) {
    if (c == '=') break;
    size_t v = kAlphabet.find(c);
    if (v == std::string::npos) Fail("record_base64 holds a character outside base64: " + in);
    acc = (acc << 6) | static_cast<uint32_t>(v);
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out.push_back(static_cast<char>((acc >> bits) & 0xFF));
    }
  }
  return out;
}

// Parses one rejects.jsonl line. The pipeline writes the head with nlohmann
// and appends a parsed record as its raw bytes (`,"record":<line>}`). JSON
// allows numbers beyond a double (e.g. 1e400, RFC 8259 section 6), which
// nlohmann refuses (out_of_range.406). The record reader rejects such a line as
// not_json today, so it is kept as record_text; should a parsed record ever
// hold one, the head is parsed alone and the raw record returned in
// *raw_record, to be compared with the input line.
bool ParseReject(const std::string& line, Json* j, std::string* raw_record) {
  try {
    *j = Json::parse(line);
    return j->is_object();
  } catch (const Json::out_of_range& e) {
    if (e.id != 406) return false;
  } catch (const Json::exception&) {
    return false;
  }
  const std::string key = ",\"record\":";
  size_t at = line.find(key);  // head strings are escaped, so the first match is the key
  if (at == std::string::npos || line.empty() || line.back() != '}') return false;
  *j = Json::parse(line.substr(0, at) + "}", nullptr, false);
  if (j->is_discarded() || !j->is_object()) return false;
  *raw_record = line.substr(at + key.size(), line.size() - 1 - at - key.size());
  (*j)["record"] = "(raw, numbers beyond a double)";
  return !raw_record->empty();
}

bool IsRecordFile(const std::string& name) {
  if (name == "rejects.jsonl") return false;
  for (const char* split : {"train", "valid", "test", "kept"}) {
    std::string s = split;
    if (name == s + ".jsonl" || (name.rfind(s + ".", 0) == 0 && name.size() > 6 &&
                                 name.compare(name.size() - 6, 6, ".jsonl") == 0 &&
                                 name.find('.', s.size() + 1) == name.size() - 6)) {
      return true;
    }
  }
  return false;
}

// Runs the pipeline once; returns the record outputs by file name (empty map
// on a failed run).
std::map<std::string, std::string> RunOnce(MemoryFileSystem& fs, const prefsift::Plan& plan,
                                           const std::vector<std::string>& files, bool rewriting,
                                           bool check_lines) {
  static std::FILE* devnull = std::fopen("/dev/null", "w");
  prefsift::PipelineOptions options;
  options.stages = {"exact", "near", "leakage", "screen", "bias", "split"};
  options.table = false;
  auto outcome = prefsift::RunPipeline(plan, options, &fs, devnull);
  if (!outcome.ok()) {
    if (outcome.status().code() == prefsift::StatusCode::kInternal) Fail("internal error: " + outcome.status().message());
    if (outcome.status().message().empty()) Fail("an error without a message");
    // The staging folder is always removed. (Whether a failed run may still
    // leave a finished output folder for inspection is the CLI's design, so
    // it is not checked here.)
    for (const auto& p : fs.AllPaths()) {
      if (p.find(".partial-") != std::string::npos) {
        Fail("a failed run left " + p + " behind (" + outcome.status().message() + ")");
      }
    }
    return {};
  }
  for (const auto& p : fs.AllPaths()) {
    if (p.find(".partial-") != std::string::npos) Fail("a successful run left its staging path " + p);
  }
  const auto& oc = outcome.value();
  if (oc.kept + oc.rejected != oc.entries) Fail("kept + rejected != records");

  // Non-blank input lines, counted here.
  std::vector<std::map<uint64_t, std::string>> lines(files.size());
  uint64_t nonblank = 0;
  for (size_t i = 0; i < files.size(); ++i) {
    lines[i] = Records(files[i], plan.limits.max_line_bytes);
    nonblank += lines[i].size();
  }
  if (check_lines && oc.entries != nonblank) {
    Fail("records read " + std::to_string(oc.entries) + " != non-blank input lines " + std::to_string(nonblank));
  }

  std::map<std::string, std::string> record_outputs;
  std::multiset<std::string> kept_lines;
  uint64_t kept_count = 0;
  for (const auto& name : fs.ListFiles(kOut)) {
    if (!IsRecordFile(name)) continue;
    std::string bytes;
    fs.Get(std::string(kOut) + "/" + name, &bytes);
    for (auto& l : Lines(bytes, name)) {
      kept_lines.insert(std::move(l));
      ++kept_count;
    }
    record_outputs[name] = std::move(bytes);
  }
  if (kept_count != oc.kept) Fail("split files hold " + std::to_string(kept_count) + " lines, kept " + std::to_string(oc.kept));

  std::string rejects;
  if (!fs.Get(std::string(kOut) + "/rejects.jsonl", &rejects)) Fail("no rejects.jsonl");
  record_outputs["rejects.jsonl"] = rejects;
  std::set<std::pair<size_t, uint64_t>> rejected_at;
  for (const auto& l : Lines(rejects, "rejects.jsonl")) {
    Json j;
    std::string raw_record;  // set when the record is kept as raw JSON and nlohmann cannot hold it
    if (!ParseReject(l, &j, &raw_record)) Fail("a rejects.jsonl line is not a JSON object: " + l);
    if (!j.contains("reason") || !j["reason"].is_string() || j["reason"].get<std::string>().empty()) {
      Fail("a reject without a reason: " + l);
    }
    if (!j.contains("message") || !j["message"].is_string()) Fail("a reject without a message: " + l);
    if (!j.contains("file") || !j["file"].is_string() || !j.contains("line") || !j["line"].is_number_unsigned()) {
      Fail("a reject without file and line: " + l);
    }
    size_t input = files.size();
    for (size_t i = 0; i < plan.inputs.size(); ++i) {
      if (plan.inputs[i].path == j["file"].get<std::string>()) input = i;
    }
    if (input == files.size()) Fail("a reject names an unknown file: " + l);
    uint64_t no = j["line"].get<uint64_t>();
    if (!rejected_at.insert({input, no}).second) Fail("one input line rejected twice: " + l);
    int forms = j.contains("record") + j.contains("record_text") + j.contains("record_base64") +
                j.contains("record_omitted");
    if (forms != 1) Fail("a reject must keep the record in exactly one form: " + l);
    if (!check_lines) continue;
    auto at = lines[input].find(no);
    if (at == lines[input].end()) Fail("a reject names a blank or missing line: " + l);
    if (rewriting) continue;
    const std::string& original = at->second;
    if (j.contains("record_text") && j["record_text"] != Json(original)) Fail("record_text differs from the input line: " + l);
    if (j.contains("record_base64") && Base64Decode(j["record_base64"].get<std::string>()) != original) {
      Fail("record_base64 differs from the input line: " + l);
    }
    if (j.contains("record")) {
      if (!raw_record.empty() ? raw_record != original : j["record"] != Json::parse(original, nullptr, false)) {
        Fail("record differs from the input line: " + l);
      }
    }
  }
  if (rejected_at.size() != oc.rejected) Fail("rejects.jsonl lines != rejected");

  if (check_lines && !rewriting) {
    std::multiset<std::string> expected;
    for (size_t i = 0; i < files.size(); ++i) {
      for (const auto& [no, text] : lines[i]) {
        if (!rejected_at.count({i, no})) expected.insert(text);
      }
    }
    if (expected != kept_lines) Fail("the kept lines are not the input lines that were not rejected");
  }

  std::string summary;
  if (!fs.Get(std::string(kOut) + "/summary.json", &summary)) Fail("no summary.json");
  if (Json::parse(summary, nullptr, false).is_discarded()) Fail("summary.json is not JSON");
  return record_outputs;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  static bool ready = (SetUpOnce(), true);
  (void)ready;
  if (size < 2) return 0;
  const Options o = Decode(data[0], data[1]);
  std::string body(reinterpret_cast<const char*>(data + 2), std::min(size - 2, kMaxInput));

  std::vector<std::string> files;
  if (o.two_inputs) {
    // Cut after the first line break past the middle (or keep one file).
    size_t nl = body.find('\n', body.size() / 2);
    if (nl == std::string::npos) nl = body.size();
    files.push_back(body.substr(0, std::min(nl + 1, body.size())));
    files.push_back(body.substr(std::min(nl + 1, body.size())));
  } else {
    files.push_back(body);
  }
  std::vector<std::string> paths;
  bool check_lines = true;
  static MemoryFileSystem fs;
  fs.Clear();
  (void)fs.MakeDir(kMem);
  MirrorReadOnlyFiles(fs);
  for (size_t i = 0; i < files.size(); ++i) {
    paths.push_back(std::string(kMem) + "/in" + std::to_string(i) + ".jsonl");
    fs.Put(paths.back(), files[i]);
    check_lines = check_lines && !LooksCompressed(files[i]);  // the reader decompresses: counted by its ledger only
  }
  prefsift::Plan plan = MakePlan(o, paths);
  const bool rewriting = o.rewrite_actions || o.position_rebalance;
  auto first = RunOnce(fs, plan, files, rewriting, check_lines);
  if (o.repeat_other_threads) {
    (void)fs.RemoveAll(kOut);
    plan.threads = o.threads == 1 ? 2 : 1;
    auto second = RunOnce(fs, plan, files, rewriting, check_lines);
    if (first != second) Fail("outputs differ between 1 and 2 threads");
  }
  return 0;
}
