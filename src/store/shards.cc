// Shard signing and merging; see shards.h.
#include "store/shards.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <span>

#include "core/record_reader.h"
#include "io/line_reader.h"
#include "io/output_dir.h"
#include "sketch/clusters.h"
#include "sketch/lsh.h"
#include "pipeline/pipeline.h"
#include "stages/stage.h"

namespace prefsift::store {
namespace {

using Json = nlohmann::ordered_json;

std::string HexBytes(const uint8_t* p, size_t n) {
  static const char* k = "0123456789abcdef";
  std::string s;
  s.reserve(2 * n);
  for (size_t i = 0; i < n; ++i) s += {k[p[i] >> 4], k[p[i] & 15]};
  return s;
}

std::string Hex64(uint64_t v) {
  char buf[17];
  std::snprintf(buf, sizeof buf, "%016llx", static_cast<unsigned long long>(v));
  return buf;
}

bool FromHex(const std::string& s, std::vector<uint8_t>* out) {
  if (s.size() % 2) return false;
  auto nib = [](char c) -> int {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return -1;
  };
  for (size_t i = 0; i < s.size(); i += 2) {
    int a = nib(s[i]), b = nib(s[i + 1]);
    if (a < 0 || b < 0) return false;
    out->push_back(static_cast<uint8_t>(a * 16 + b));
  }
  return true;
}

// Captures the near stage's signatures and writes them out.
class SignatureWriter : public RunCompanion {
 public:
  std::string name() const override { return "shard"; }
  Status Decide(StageContext& ctx) override {
    sig_ = ctx.results.Find<NearSignatures>();  // published because the caller asked (want_signatures)
    if (!sig_) return Status::Usage("shard-sign: the near stage is disabled in the plan");
    if (sig_->threshold < 0) return Status::Usage("shard-sign: stages.near.verify \"exact\" is not supported");
    return Status::Ok();
  }
  void Report(const RunState&, Json* s) const override {
    (*s)["file"] = "signatures.jsonl";
    (*s)["records_signed"] = signed_;
  }
  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.Create("signatures.jsonl");
    if (!f.ok()) return f.status();
    const uint32_t K = sig_->slots;
    sketch::Banding banding{sig_->bands, sig_->rows};
    Json head{{"prefsift_signatures", 1}, {"slots", K}, {"bands", banding.bands}, {"rows", banding.rows},
              {"threshold", sig_->threshold}, {"band_seed", Hex64(sketch::ClusterOptions{}.band_seed)}};
    Status s = f.value()->Append(head.dump() + "\n");
    std::vector<uint64_t> keys(banding.bands);
    for (size_t i = 0; i < st.records.size() && s.ok(); ++i) {
      std::span<const uint8_t> sig(sig_->bytes.data() + i * K, K);
      sketch::BandKeys(sig, banding, sketch::ClusterOptions{}.band_seed, keys);
      Json bands = Json::array();
      for (uint64_t k : keys) bands.push_back(Hex64(k));
      const Entry& e = st.entries[st.records[i].entry];
      Json line{{"id", st.records[i].id}, {"input", st.plan().inputs[e.input].name}, {"line", e.line},
                {"signature", HexBytes(sig.data(), K)}, {"bands", bands}};
      s = f.value()->Append(line.dump() + "\n");
      ++signed_;
    }
    if (!s.ok()) return s;
    return f.value()->Close();
  }

 private:
  mutable uint64_t signed_ = 0;
  const NearSignatures* sig_ = nullptr;  // the near stage's, published on request
};

}  // namespace

Status ShardSign(const Plan& plan, FileSystem* fs, std::FILE* log, bool table) {
  SignatureWriter writer;
  PipelineOptions o;
  o.stages = {"near"};
  o.table = table;
  o.companion = &writer;
  o.want_signatures = true;
  auto r = RunPipeline(plan, o, fs, log);
  return r.ok() ? Status::Ok() : r.status();
}

Result<MergeOutcome> MergeShards(const std::vector<std::string>& files, const std::string& out_dir, bool overwrite,
                                 unsigned threads, FileSystem* fs) {
  if (files.empty()) return Status::Usage("merge: name at least one signatures.jsonl");
  Json head0;
  std::vector<uint8_t> sigs;
  std::vector<std::string> ids;
  uint32_t K = 0;
  for (const auto& path : files) {
    // The shared reading path: plain, gzip or zstd, with the default line limit.
    auto opened = LineReader::Open(fs, path, InputLimits{}.max_line_bytes);
    if (!opened.ok()) return Status::Input("merge: cannot read " + path + ": " + opened.status().message());
    LineReader& in = *opened.value();
    std::string_view line;
    uint64_t no = 0;
    bool header = true;
    for (;;) {
      auto next = in.Read(&line, &no);
      if (!next.ok()) return Status::Input("merge: " + path + ": " + next.status().message());
      if (next.value() == LineReader::Next::kEnd) break;
      if (next.value() == LineReader::Next::kTooLong) {
        return Status::Input("merge: " + path + ":" + std::to_string(no) + ": line longer than the line limit");
      }
      if (line.empty()) continue;
      Json j = Json::parse(line, nullptr, false);
      if (header) {
        header = false;
        if (!j.is_object() || !j.contains("prefsift_signatures")) {
          return Status::Input("merge: " + path + ":" + std::to_string(no) +
                               ": not a signatures file (the first line is not its header)");
        }
        for (const char* k : {"slots", "bands", "rows"}) {
          if (!j.contains(k) || !j[k].is_number_unsigned() || j[k].get<uint64_t>() == 0) {
            return Status::Input("merge: " + path + ":" + std::to_string(no) + ": header field \"" + k +
                                 "\" must be a positive integer");
          }
        }
        if (!j.contains("threshold") || !j["threshold"].is_number()) {
          return Status::Input("merge: " + path + ":" + std::to_string(no) + ": header field \"threshold\" must be a number");
        }
        Json h = j;
        if (head0.is_null()) {
          head0 = h;
          K = h["slots"].get<uint32_t>();
        } else if (h != head0) {
          return Status::Usage("merge: " + path + " was signed with other settings (" + h.dump() + " vs " + head0.dump() + ")");
        }
        continue;
      }
      std::vector<uint8_t> sig;
      if (!j.is_object() || !j.contains("signature") || !j["signature"].is_string() ||
          !FromHex(j["signature"].get<std::string>(), &sig) || sig.size() != K) {
        return Status::Input("merge: " + path + ":" + std::to_string(no) +
                             ": not a signature line (field \"signature\": " + std::to_string(K) + " bytes in hex)");
      }
      sigs.insert(sigs.end(), sig.begin(), sig.end());
      ids.push_back(j.value("id", std::string()));
    }
  }
  if (head0.is_null()) return Status::Input("merge: the files hold no header");
  sketch::ClusterOptions opt;
  opt.threshold = head0["threshold"].get<double>();
  opt.banding = sketch::Banding{head0["bands"].get<uint32_t>(), head0["rows"].get<uint32_t>()};
  opt.threads = threads ? threads : 1;
  MergeOutcome outcome;
  outcome.records = ids.size();
  sketch::Clustering c;
  if (ids.size() >= 2) {
    auto r = sketch::ClusterCompactSignatures(sigs, K, opt);
    if (!r.ok()) return r.status();
    c = std::move(r).value();
  }
  std::vector<ReadPath> reads;
  for (const auto& f : files) reads.push_back({f, "shard file"});
  if (Status clear = CheckOutputClear(out_dir, reads); !clear.ok()) return clear;
  auto out = OutputDir::Begin(fs, out_dir, overwrite);
  if (!out.ok()) return out.status();
  auto f = out.value()->Create("clusters.jsonl");
  if (!f.ok()) return f.status();
  std::vector<std::vector<uint32_t>> members(ids.size());
  for (uint32_t i = 0; i < c.cluster_of.size(); ++i) members[c.cluster_of[i]].push_back(i);
  for (const auto& cs : c.clusters) {
    Json m = Json::array();
    for (uint32_t i : members[cs.id]) m.push_back(ids[i]);
    Json line{{"cluster", cs.id}, {"first", ids[cs.id]}, {"size", cs.size}, {"members", m},
              {"min_similarity", std::round(cs.min_similarity * 1e6) / 1e6},
              {"max_similarity", std::round(cs.max_similarity * 1e6) / 1e6}};
    Status s = f.value()->Append(line.dump() + "\n");
    if (!s.ok()) return s;
    ++outcome.clusters;
    outcome.records_in_clusters += cs.size;
  }
  if (Status s = f.value()->Close(); !s.ok()) return s;
  Json summary{{"files", files}, {"settings", head0}, {"records", outcome.records}, {"clusters", outcome.clusters},
               {"records_in_clusters", outcome.records_in_clusters},
               {"candidate_pairs", c.stats.candidates.unique_pairs}, {"verified_pairs", c.stats.verified_edges}};
  if (Status s = out.value()->Write("merge.json", summary.dump(2) + "\n"); !s.ok()) return s;
  if (Status s = out.value()->Commit(); !s.ok()) return s;
  return outcome;
}

}  // namespace prefsift::store
