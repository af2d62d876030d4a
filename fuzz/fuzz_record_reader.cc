// Fuzz target: one JSONL line through RecordReader with a layout.
// The first input byte picks one of several layouts (every judgment shape,
// chat prompts, candidate objects, metadata) and small limits, so the
// fuzzer reaches the limit checks too. Property: Read() never crashes, and
// on failure it always gives a reason code and a message.
#include <nlohmann/json.hpp>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "core/layout.h"
#include "core/record_reader.h"

namespace {

using Json = nlohmann::ordered_json;

std::vector<prefsift::Layout> MakeLayouts() {
  std::vector<Json> specs = {
      Json{{"preset", "choice"}},
      Json{{"preset", "ranked"}},
      Json{{"id", "/k"}, {"prompt", "/turns"}, {"candidates", "/answers"}, {"candidate_text", "/body"},
           {"candidate_origin", "/model"}, {"order", "/order"}, {"annotator", "/who"}, {"metadata", "/meta"}},
      Json{{"prompt", "/q/0/text"}, {"chosen", "/good"}, {"rejected", "/bad"}, {"thread", "/t"},
           {"group", "/g"}, {"source", "/s"}, {"timestamp", "/ts"}},
      Json{{"preset", "choice"}, {"choice_base", 1}, {"metadata", ""}},
  };
  std::vector<prefsift::Layout> out;
  for (const auto& s : specs) {
    auto l = prefsift::LayoutFromJson(s, "fuzz");
    if (!l.ok()) {
      std::fprintf(stderr, "fuzz layout rejected: %s\n", l.status().message().c_str());
      std::abort();
    }
    out.push_back(l.value());
  }
  return out;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  static const std::vector<prefsift::Layout> layouts = MakeLayouts();
  if (size < 1) return 0;
  uint8_t sel = data[0];
  prefsift::InputLimits lim;
  if (sel & 0x80) {  // tight limits
    lim.max_depth = 8;
    lim.max_candidates = 4;
    lim.max_text_bytes = 16;
  }
  static prefsift::RecordReader* readers[2 * 5] = {};
  size_t idx = (sel & 0x80 ? 5 : 0) + (sel % layouts.size());
  if (!readers[idx]) readers[idx] = new prefsift::RecordReader(layouts[sel % layouts.size()], lim);
  std::string_view line(reinterpret_cast<const char*>(data + 1), size - 1);
  prefsift::Record rec;
  prefsift::RejectReason why;
  bool ok = readers[idx]->Read(line, "fuzz:1", &rec, &why);
  if (!ok && (why.code.empty() || why.message.empty())) std::abort();
  if (ok && rec.candidates.size() < 2) std::abort();
  return 0;
}
