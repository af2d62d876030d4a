// parse_modes: what a full parse of every line costs against simdjson's
// on-demand reading of only the fields a layout names, and what on-demand
// reading would let through. The figures behind docs/architecture.md, "Why
// every line is parsed whole".
//
//   parse_modes FILE [LINES]
//
// FILE is a JSONL file of the bench generator's shape (bench/pipeline/
// make_prefs, make_template_prefs): "id", "prompt", "candidates" (strings),
// "choice", "annotator", "source", "thread". One thread, the file read once
// into memory first (reading is not timed). Prints `name seconds MB/s`
// lines for
//   reader     - prefsift's RecordReader (a full simdjson DOM parse of the line,
//                every check of the layout, the texts copied into a Record),
//                as pass 1 runs it;
//   full parse - the DOM parse alone;
//   on-demand  - simdjson's on-demand API reading the same seven fields as
//                views (no copies, no checks beyond the fields' types);
// and then, for five lines that are malformed only in a value no field of
// the layout reads, whether each way accepts them. A line accepted there
// would be copied byte for byte into a split (pipeline/apply_pass.cc).
#include <simdjson.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "core/file_system.h"
#include "core/layout.h"
#include "core/record_reader.h"
#include "io/file_system.h"

namespace {

double Now() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

prefsift::Layout BenchLayout() {
  nlohmann::ordered_json spec = {
      {"preset", "choice"}, {"annotator", "/annotator"}, {"source", "/source"}, {"thread", "/thread"}};
  auto l = prefsift::LayoutFromJson(spec, "bench");
  if (!l.ok()) {
    std::fprintf(stderr, "layout: %s\n", l.status().message().c_str());
    std::exit(1);
  }
  return l.value();
}

// The seven fields read as views; false when one is missing or of the wrong type.
bool ReadOnDemand(simdjson::ondemand::parser& parser, const simdjson::padded_string_view& line, size_t* chars) {
  simdjson::ondemand::document doc;
  if (parser.iterate(line).get(doc)) return false;
  std::string_view s;
  int64_t choice = 0;
  size_t n = 0;
  if (doc["id"].get(s)) return false;
  n += s.size();
  if (doc["prompt"].get(s)) return false;
  n += s.size();
  simdjson::ondemand::array arr;
  if (doc["candidates"].get_array().get(arr)) return false;
  for (auto v : arr) {
    if (v.get(s)) return false;
    n += s.size();
  }
  if (doc["choice"].get(choice)) return false;
  for (const char* key : {"annotator", "source", "thread"}) {
    auto f = doc[key];
    if (f.error() == simdjson::NO_SUCH_FIELD) continue;
    if (f.get(s)) return false;
    n += s.size();
  }
  *chars += n;
  return true;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: parse_modes FILE [LINES]\n");
    return 2;
  }
  const size_t max_lines = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : SIZE_MAX;
  auto read = prefsift::ReadWholeFile(prefsift::DefaultFileSystem(), argv[1]);
  if (!read.ok()) {
    std::fprintf(stderr, "%s\n", read.status().message().c_str());
    return 1;
  }
  std::string data = std::move(read).value();
  const size_t size = data.size();
  data.append(simdjson::SIMDJSON_PADDING, '\0');  // every line is followed by readable bytes
  std::vector<std::string_view> lines;
  for (size_t at = 0; at < size && lines.size() < max_lines;) {
    size_t end = data.find('\n', at);
    if (end == std::string::npos || end > size) end = size;
    if (end > at) lines.emplace_back(data.data() + at, end - at);
    at = end + 1;
  }
  uint64_t bytes = 0;
  for (auto l : lines) bytes += l.size() + 1;
  std::printf("lines %zu bytes %llu\n", lines.size(), static_cast<unsigned long long>(bytes));
  auto report = [&](const char* name, double s) { std::printf("%-11s %8.3f s %9.1f MB/s\n", name, s, bytes / s / 1e6); };

  const prefsift::Layout layout = BenchLayout();
  {
    prefsift::RecordReader reader(layout, prefsift::InputLimits{});
    prefsift::Record rec;
    prefsift::RejectReason why;
    size_t ok = 0;
    const double t0 = Now();
    for (auto l : lines) ok += reader.Read(l, "bench", &rec, &why, /*padded=*/true);
    report("reader", Now() - t0);
    if (ok != lines.size()) std::printf("  (reader refused %zu lines)\n", lines.size() - ok);
  }
  {
    simdjson::dom::parser parser;
    simdjson::dom::element e;
    size_t ok = 0;
    const double t0 = Now();
    for (auto l : lines) ok += parser.parse(l.data(), l.size(), /*realloc_if_needed=*/false).get(e) == simdjson::SUCCESS;
    report("full parse", Now() - t0);
    if (ok != lines.size()) std::printf("  (full parse refused %zu lines)\n", lines.size() - ok);
  }
  {
    simdjson::ondemand::parser parser;
    size_t ok = 0, chars = 0;
    const double t0 = Now();
    for (auto l : lines) ok += ReadOnDemand(parser, simdjson::padded_string_view(l.data(), l.size(), l.size() + simdjson::SIMDJSON_PADDING), &chars);
    report("on-demand", Now() - t0);
    if (ok != lines.size()) std::printf("  (on-demand refused %zu lines)\n", lines.size() - ok);
  }

  // Malformed only in "note", which no field of the layout reads (RFC 8259
  // sections 5, 3, 6, 4 and 2).
  const std::string head = R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0,"note":)";
  const std::vector<std::string> bad = {head + "[1,2,]}", head + "tru}", head + "01}", head + R"({"k":}})",
                                        head + "1} x"};
  prefsift::RecordReader reader(layout, prefsift::InputLimits{});
  simdjson::ondemand::parser od;
  size_t od_accepts = 0, reader_accepts = 0;
  for (const std::string& line : bad) {
    std::string padded = line + std::string(simdjson::SIMDJSON_PADDING, '\0');
    size_t chars = 0;
    const bool a = ReadOnDemand(od, simdjson::padded_string_view(padded.data(), line.size(), padded.size()), &chars);
    prefsift::Record rec;
    prefsift::RejectReason why;
    const bool b = reader.Read(line, "bench", &rec, &why);
    od_accepts += a;
    reader_accepts += b;
    std::printf("malformed %-70s on-demand %-8s reader %s\n", line.c_str(), a ? "accepts" : "refuses",
                b ? "accepts" : ("refuses (" + why.code + ")").c_str());
  }
  std::printf("malformed lines accepted: on-demand %zu of %zu, reader %zu of %zu\n", od_accepts, bad.size(),
              reader_accepts, bad.size());
  return 0;
}
