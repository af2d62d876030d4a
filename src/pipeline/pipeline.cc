#include "pipeline/pipeline.h"

#include <nlohmann/json.hpp>

#include <time.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <filesystem>
#include <future>
#include <optional>
#include <set>
#include <thread>

#include "core/beside.h"
#include "core/blank.h"
#include "core/free_memory.h"
#include "core/json_dump.h"
#include "core/peak_rss.h"
#include "core/normalize.h"
#include "core/record_reader.h"
#include "core/thread_pool.h"
#include "io/digesting_file_system.h"
#include "io/line_reader.h"
#include "io/output_dir.h"
#include "pipeline/passes.h"
#include "pipeline/progress.h"
#include "pipeline/finish.h"
#include "report/gate.h"
#include "report/summary.h"
#include "stages/facts.h"
#include "stages/screen/screen_stage.h"
#include "stages/stage.h"
#include "stages/stage_context.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
// Lines per chunk of pass 1. Two chunks are in memory at once (one being read
// ahead), each held as text, parsed record and normalised text: about 11 KB a
// line for 3.6 KB records, so 256 lines keep that near 6 MB. A chunk is parsed
// in one parallel loop and observed in the next; small enough, its records
// are still in the cache when the stages read them (1M records: 1024 lines a
// chunk took 7-11% more CPU in pass 1; docs/performance.md, ninth session).
constexpr size_t kChunkLines = 256;

std::string Base64(std::string_view in) {
  static const char* k = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  size_t i = 0;
  for (; i + 2 < in.size(); i += 3) {
    uint32_t v = (uint32_t(uint8_t(in[i])) << 16) | (uint32_t(uint8_t(in[i + 1])) << 8) | uint8_t(in[i + 2]);
    out += {k[v >> 18], k[(v >> 12) & 63], k[(v >> 6) & 63], k[v & 63]};
  }
  if (i + 1 == in.size()) {
    uint32_t v = uint32_t(uint8_t(in[i])) << 16;
    out += {k[v >> 18], k[(v >> 12) & 63], '=', '='};
  } else if (i + 2 == in.size()) {
    uint32_t v = (uint32_t(uint8_t(in[i])) << 16) | (uint32_t(uint8_t(in[i + 1])) << 8);
    out += {k[v >> 18], k[(v >> 12) & 63], k[(v >> 6) & 63], '='};
  }
  return out;
}

const char* CompressionName(Compression c) {
  switch (c) {
    case Compression::kNone: return "none";
    case Compression::kGzip: return "gzip";
    case Compression::kZstd: return "zstd";
  }
  return "?";
}

// One line of a chunk, after parsing.
struct Parsed {
  uint64_t line = 0;
  bool too_long = false;
  bool ok = false;
  Record rec;
  RecordFacts facts;
  std::vector<CandidateFacts> cands;  // facts.cands until KeepRecordFacts
  MatchText text;
  RejectReason why;
};

// Wall time per phase, printed on the log with --timings; never written to an
// output file (outputs must not depend on the clock).
class PhaseTimer {
 public:
  PhaseTimer(bool on, std::FILE* log) : on_(on), log_(log), last_(std::chrono::steady_clock::now()) {}
  void Mark(const std::string& phase) {
    if (!on_) return;
    auto now = std::chrono::steady_clock::now();
    std::fprintf(log_, "timing: %-22s %8.3f s\n", phase.c_str(), std::chrono::duration<double>(now - last_).count());
    last_ = now;
    // The peak resident size, when it grew in this phase (so the last such
    // line names the phase that set the run's peak).
    const uint64_t peak = PeakResidentBytes();
    if (peak > peak_) {
      std::fprintf(log_, "timing rss:   peak so far %8.1f MiB\n", static_cast<double>(peak) / (1024.0 * 1024.0));
      peak_ = peak;
    }
  }
  // A figure inside the last phase (CPU seconds of a part of it); the clock
  // runs on.
  // Wall seconds of a part of the last phase (no CPU clock): --timings.
  void NoteWall(const std::string& what, double wall_seconds) {
    if (on_) std::fprintf(log_, "timing wall:  %-18s %8.3f s\n", what.c_str(), wall_seconds);
  }
  void Note(const std::string& what, double cpu_seconds) {
    if (on_) std::fprintf(log_, "timing cpu:   %-18s %8.3f s\n", what.c_str(), cpu_seconds);
  }

 private:
  bool on_;
  uint64_t peak_ = 0;
  std::FILE* log_;
  std::chrono::steady_clock::time_point last_;
};

// The inputs' total size on disk; 0 when one cannot be measured.
uint64_t InputBytes(const Plan& plan) {
  uint64_t total = 0;
  for (const auto& in : plan.inputs) {
    std::error_code ec;
    uint64_t n = std::filesystem::file_size(in.path, ec);
    if (ec) return 0;
    total += n;
  }
  return total;
}

// One chunk of lines as read from an input: copies (the line reader's views
// are transient), back to back in one buffer with the parser's padding after
// the last, so the next chunk can be read while this one is parsed in place.
struct RawChunk {
  std::string bytes;               // the lines, then RecordReader::kPadding bytes
  std::vector<size_t> begins{0};   // line k is bytes[begins[k], begins[k + 1]); empty when too long
  std::vector<uint64_t> line_numbers;
  std::vector<uint8_t> too_long;
  uint64_t lines = 0, blank_lines = 0;  // every line read, blank ones included
  uint64_t bytes_read = 0;              // the reader's position after the chunk
  bool eof = false;
  Status status = Status::Ok();

  size_t size() const { return line_numbers.size(); }
  std::string_view line(size_t k) const {
    return std::string_view(bytes).substr(begins[k], begins[k + 1] - begins[k]);
  }
};

// Fills `c`, a handled chunk's storage (reused, so that its buffers are not
// allocated, faulted in and regrown for every chunk).
RawChunk ReadChunk(LineReader& reader, RawChunk c) {
  c.bytes.clear();
  c.begins.assign(1, 0);
  c.line_numbers.clear();
  c.too_long.clear();
  c.lines = c.blank_lines = c.bytes_read = 0;
  c.eof = false;
  c.status = Status::Ok();
  while (c.size() < kChunkLines) {
    std::string_view line;
    uint64_t no = 0;
    auto next = reader.Read(&line, &no);
    if (!next.ok()) {
      c.status = next.status();
      break;
    }
    if (next.value() == LineReader::Next::kEnd) {
      c.eof = true;
      break;
    }
    ++c.lines;
    if (next.value() == LineReader::Next::kLine && IsBlank(line)) {
      ++c.blank_lines;
      continue;
    }
    const bool too_long = next.value() == LineReader::Next::kTooLong;
    if (!too_long) c.bytes.append(line);
    c.begins.push_back(c.bytes.size());
    c.line_numbers.push_back(no);
    c.too_long.push_back(too_long);
  }
  c.bytes.append(RecordReader::kPadding, ' ');
  c.bytes_read = reader.bytes_read();
  return c;
}

// After the first chunk: the expected number of records (uncompressed inputs'
// sizes over the chunk's mean line length, plus 5%), reserved in the fact
// table and offered to the stages, so that 1M records do not pass through
// vectors that double (two copies alive at once, and up to twice the room).
void ReserveForInputs(const Plan& plan, const RawChunk& first, RunState& st,
                      std::vector<std::unique_ptr<Stage>>& stages) {
  uint64_t bytes = 0;
  for (const auto& in : plan.inputs) {
    std::error_code ec;
    uint64_t size = std::filesystem::file_size(in.path, ec);
    if (ec) return;  // a hint only: no size, no reservation
    bytes += size;
  }
  if (first.bytes_read == 0 || first.lines == 0 || first.eof) return;
  const double per_line = static_cast<double>(first.bytes_read) / static_cast<double>(first.lines);
  // Compressed inputs: the reader counts decompressed bytes, so the estimate is
  // low; it only means some growth by doubling, as without a hint.
  const auto expected = static_cast<size_t>(static_cast<double>(bytes) / per_line * 1.05) + 1024;
  st.entries.reserve(expected);
  st.decisions.reserve(expected);
  st.records.reserve(expected);
  for (auto& s : stages) s->Reserve(expected);
}

std::string KeysOf(std::string_view line) {
  Json j = Json::parse(line, nullptr, /*allow_exceptions=*/false);
  if (j.is_discarded()) return "(the line is not JSON)";
  if (!j.is_object()) return std::string("(the line is a JSON ") + j.type_name() + ", not an object)";
  std::string keys;
  size_t n = 0;
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (++n > 20) {
      keys += ", ...";
      break;
    }
    keys += (keys.empty() ? "" : ", ") + Json(it.key()).dump(-1, ' ', false, Json::error_handler_t::replace);
  }
  return keys.empty() ? "(an empty object)" : keys;
}

// Stops a run whose layout is almost certainly wrong for a file, before
// anything is decided or written (docs/cli.md, exit codes 2, 7 and 8).
Status CheckInputSanity(const Plan& plan, const InputSpec& spec, const InputStats& stats,
                        const std::map<std::string, IngestTally>& tallies, const BaseEvidence& ev) {
  if (stats.entries == 0) {
    return Status::EmptyInput(spec.path + (stats.lines == 0 ? std::string(": the file is empty")
                                                            : ": the file's " + std::to_string(stats.lines) +
                                                                  " line(s) are all blank") +
                              "; there is nothing to check. Is it the right file? Nothing was written.");
  }
  const Layout& L = spec.layout;
  if (!L.base_given && L.judgment != JudgmentShape::kPairwise) {
    const std::string where = spec.path + ": " + std::to_string(ev.judgments) + " judgment(s) read";
    if ((L.judgment == JudgmentShape::kChoice || L.judgment == JudgmentShape::kOrder) && ev.first_slot == 0 &&
        ev.past_last > 0) {
      return Status::Usage(
          where + ", none names candidate 0 and " + std::to_string(ev.past_last) +
          " name candidate B (one past the last when counting from 0): the " +
          (L.judgment == JudgmentShape::kChoice ? "choices" : "orders") +
          " look 1-based. prefsift does not guess: set the layout's \"choice_base\" to 1 (command line: --field "
          "choice_base=1), or to 0 to count from 0 and reject those records (docs/layouts.md)");
    }
    if (L.judgment == JudgmentShape::kRanks && ev.best_rank_1 == 0 && ev.best_rank_0 > 0) {
      return Status::Usage(where + ", " + std::to_string(ev.best_rank_0) +
                           " ranking(s) have 0 as the best rank and none has 1: the ranks look 0-based. prefsift "
                           "does not guess: set the layout's \"rank_base\" to 0 (command line: --field rank_base=0), "
                           "or to 1 to reject those records (docs/layouts.md)");
    }
  }
  for (const auto& [reason, t] : tallies) {
    const double share = static_cast<double>(t.count) / static_cast<double>(stats.entries);
    if (share <= plan.limits.max_reject_share) continue;
    char pct[32];
    std::snprintf(pct, sizeof pct, "%.1f%%", 100.0 * share);
    std::string msg = spec.path + ": " + reason + " rejects " + std::to_string(t.count) + " of " +
                      std::to_string(stats.entries) + " records (" + pct + ", more than limits.max_reject_share = " +
                      std::to_string(plan.limits.max_reject_share).substr(0, 4) + ")";
    if (!t.field.empty()) msg += " at the pointer " + t.field;
    msg += ". This is almost always a layout mistake (or a limit set too low). The first such line (line " + std::to_string(t.first_line) +
           ") has the keys: " + t.first_keys +
           ". Check the layout's pointers (prefsift layouts; docs/layouts.md), or raise limits.max_reject_share "
           "(--max-reject-share) if the file really is this broken. Nothing was written.";
    return Status::LayoutSuspect(msg);
  }
  return Status::Ok();
}

// CPU seconds of pass 1's parts, summed over the pool's workers (--timings):
// reading a line into a record with its facts, and each stage's Observe.
// Thread CPU clocks, so a busy machine does not inflate the figures.
class Pass1Cpu {
 public:
  Pass1Cpu(size_t stages, unsigned workers) : parts_(stages + 3), seconds_(parts_ * workers, 0.0) {}
  // Records timed together (between two clock reads).
  static constexpr size_t kBlock = 64;
  static size_t Blocks(size_t n) { return (n + kBlock - 1) / kBlock; }
  static double Now() {
    timespec t{};
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
  }
  // Part 0 is reading; part 1 + s is stage s.
  void Add(unsigned worker, size_t part, double seconds) { seconds_[worker * parts_ + part] += seconds; }
  // The in-order step's own seconds (numbering a chunk, keeping its facts,
  // growing the stages: on one worker, beside the parsing of the next chunk),
  // and the wall seconds workers waited for it before they could observe.
  void AddInOrder(unsigned worker, double seconds) { Add(worker, parts_ - 2, seconds); }
  void AddWaited(unsigned worker, double seconds) { Add(worker, parts_ - 1, seconds); }
  double InOrder() const { return Total(parts_ - 2); }
  double Waited() const { return Total(parts_ - 1); }
  // Wall seconds on the calling thread alone, while the workers wait for the
  // reader's next chunk. What a larger machine cannot shorten.
  static double Wall() {
    return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
  }
  double waiting = 0;
  double Total(size_t part) const {
    double sum = 0;
    for (size_t w = 0; w < seconds_.size() / parts_; ++w) sum += seconds_[w * parts_ + part];
    return sum;
  }

 private:
  size_t parts_;
  std::vector<double> seconds_;  // worker-major
};

// `part`: only that part of one input, its checks left to the caller, its
// ingest figures to (*ingest)[part->input] (pass1.h).
Status Observe(const Plan& plan, RunState& st, std::vector<std::unique_ptr<Stage>>& stages, FileSystem* fs,
               ThreadPool& pool, Progress& progress, const Part* part = nullptr,
               std::vector<InputIngest>* ingest = nullptr, Pass1Cpu* cpu = nullptr) {
  st.inputs.resize(plan.inputs.size());
  // Two chunks' parsed lines take turns (buffers keep their capacity): while
  // one chunk's records are observed, the next chunk's lines are parsed, in
  // the same parallel loop, so the workers meet at one barrier a chunk.
  std::vector<Parsed> observing, parsing;
  std::vector<size_t> observing_rec;  // a line of `observing`: its record index, SIZE_MAX for none
  for (uint32_t in = 0; in < plan.inputs.size(); ++in) {
    if (part && in != part->input) continue;
    const InputSpec& spec = plan.inputs[in];
    InputStats& stats = st.inputs[in];
    LineRange range;
    if (part) range = LineRange{part->begin, part->end.value_or(UINT64_MAX), part->first_line};
    auto opened = LineReader::Open(fs, spec.path, plan.limits.max_line_bytes, range);
    if (!opened.ok()) return opened.status();
    LineReader& reader = *opened.value();
    stats.compression = CompressionName(reader.compression());
    std::map<std::string, IngestTally> tallies;
    if (reader.compression() != Compression::kNone) progress.Compressed();
    std::vector<std::unique_ptr<RecordReader>> parsers;
    for (unsigned t = 0; t < pool.size(); ++t) {
      parsers.push_back(std::make_unique<RecordReader>(spec.layout, plan.limits));
    }
    // The next chunk is read on its own thread while the current one is parsed
    // and observed; chunks are still handled strictly in input order. Every
    // path out of the loop waits for that read first (the future's destructor).
    // Three chunks' storage take turns: the one being read, the one being
    // parsed, and the one before it, numbered and observed (its lines are read
    // for the ingest tallies).
    RawChunk spare, prev_raw;
    std::future<RawChunk> ahead = std::async(std::launch::async, ReadChunk, std::ref(reader), RawChunk());
    // One parallel loop a chunk (a "round"), items in this order:
    //   [number]   the chunk before (`observing`, from prev_raw): its entries
    //              and records numbered in input order, facts kept, stages
    //              grown. One item, on one worker: the part that must run in
    //              input order;
    //   [parse]    this chunk's lines (`parsing`, from `raw`) parsed into
    //              records with their facts, beside the numbering;
    //   [observe]  the chunk before's records seen by every stage's Observe,
    //              once the numbering is done (they wait for it).
    // Indexes are handed out in increasing order (core/thread_pool.h), so the
    // numbering is always taken before any observe item waits for it (with
    // one worker it simply runs first). Parse items touch neither the run
    // state nor the stages; the numbering touches nothing a parse item reads.
    const auto observe_one = [&](size_t i, size_t k) {
      stages[k]->Observe(observing_rec[i], observing[i].rec, st.records[observing_rec[i]], observing[i].text);
    };
    const auto parse_one = [&](const RawChunk& raw, size_t i, unsigned t) {
      Parsed& p = parsing[i];
      p.line = raw.line_numbers[i];
      p.too_long = raw.too_long[i] != 0;
      p.ok = false;
      if (p.too_long) return;
      p.ok = parsers[t]->Read(raw.line(i), spec.name + ":" + std::to_string(p.line), &p.rec, &p.why,
                              /*padded=*/true);
      if (p.ok) p.facts = ComputeFacts(p.rec, plan.normalize, &p.text, &p.cands);
    };
    bool first_chunk = !part && in == 0;  // the first chunk of the run: sizes the reservations
    const auto number = [&](const RawChunk& raw) {
      const size_t n = raw.size();
      observing_rec.assign(n, SIZE_MAX);
      for (size_t i = 0; i < n; ++i) {
        Parsed& p = observing[i];
        Entry e;
        e.input = in;
        e.line = p.line;
        size_t entry_index = st.entries.size();
        ++stats.entries;
        if (p.ok) {
          e.record = static_cast<int32_t>(st.records.size());
          observing_rec[i] = st.records.size();
          p.facts.entry = static_cast<uint32_t>(entry_index);
          KeepRecordFacts(p.rec, st, &p.facts);
          st.records.push_back(std::move(p.facts));
          ++stats.records;
        }
        st.entries.push_back(e);
        st.decisions.emplace_back();
        if (p.too_long) {
          st.RejectEntry(entry_index, "ingest", "line_too_long", "",
                         "the line is longer than limits.max_line_bytes = " + std::to_string(plan.limits.max_line_bytes));
        } else if (!p.ok) {
          st.RejectEntry(entry_index, "ingest", p.why.code, p.why.field, p.why.message, p.why.id);
        }
        if (!p.ok) {
          IngestTally& t = tallies[p.too_long ? std::string("line_too_long") : p.why.code];
          if (t.count++ == 0) {
            t.field = p.too_long ? "" : p.why.field;
            t.first_line = p.line;
            t.first_keys = p.too_long ? "(not read: too long)" : KeysOf(raw.line(i));
          }
        }
      }
      if (first_chunk && n > 0) ReserveForInputs(plan, raw, st, stages);
      first_chunk = false;
      for (auto& s : stages) s->Grow(st.records.size());
    };
    // `prev`: the chunk before `raw` (numbered and observed this round), or
    // null in the first round; `raw`: this chunk, or null after the last.
    const auto round = [&](const RawChunk* prev, const RawChunk* raw) {
      const size_t to_number = prev ? 1 : 0, to_parse = raw ? raw->size() : 0;
      const size_t to_observe = prev ? prev->size() : 0, total = to_number + to_parse + to_observe;
      const size_t observe_from = to_number + to_parse;
      std::atomic<bool> numbered{prev == nullptr};
      if (raw) parsing.resize(to_parse);
      const auto run_number = [&] {
        number(*prev);
        numbered.store(true, std::memory_order_release);
        numbered.notify_all();
      };
      // Waits until the numbering is done; returns the seconds waited.
      const auto await_number = [&]() -> double {
        if (numbered.load(std::memory_order_acquire)) return 0;
        const double w0 = Pass1Cpu::Wall();
        numbered.wait(false, std::memory_order_acquire);
        return Pass1Cpu::Wall() - w0;
      };
      if (!cpu) {
        pool.ParallelFor(total, [&](size_t i, unsigned t) {
          if (i < to_number) return run_number();
          if (i < observe_from) return parse_one(*raw, i - to_number, t);
          const size_t r = i - observe_from;
          await_number();
          if (observing_rec[r] == SIZE_MAX) return;
          for (size_t k = 0; k < stages.size(); ++k) observe_one(r, k);
        });
        return;
      }
      // --timings: a block of records between two reads of the thread's CPU
      // clock (a system call), not around every record, so timing does not
      // slow the run it measures; each stage over the block's records in turn.
      // The numbering's own CPU seconds are printed as "in order (beside
      // parsing)", the seconds workers waited for it as the wall line "in order".
      const size_t parse_blocks = Pass1Cpu::Blocks(to_parse), observe_blocks = Pass1Cpu::Blocks(to_observe);
      pool.ParallelFor(to_number + parse_blocks + observe_blocks, [&](size_t b, unsigned t) {
        if (b < to_number) {
          const double t0 = Pass1Cpu::Now();
          run_number();
          cpu->AddInOrder(t, Pass1Cpu::Now() - t0);
          return;
        }
        double t0 = Pass1Cpu::Now();
        if (b < to_number + parse_blocks) {
          const size_t lo = (b - to_number) * Pass1Cpu::kBlock, hi = std::min(to_parse, lo + Pass1Cpu::kBlock);
          for (size_t i = lo; i < hi; ++i) parse_one(*raw, i, t);
          cpu->Add(t, 0, Pass1Cpu::Now() - t0);
          return;
        }
        cpu->AddWaited(t, await_number());
        t0 = Pass1Cpu::Now();
        const size_t lo = (b - to_number - parse_blocks) * Pass1Cpu::kBlock, hi = std::min(to_observe, lo + Pass1Cpu::kBlock);
        for (size_t k = 0; k < stages.size(); ++k) {
          for (size_t i = lo; i < hi; ++i) {
            if (observing_rec[i] != SIZE_MAX) observe_one(i, k);
          }
          const double t1 = Pass1Cpu::Now();
          cpu->Add(t, 1 + k, t1 - t0);
          t0 = t1;
        }
      });
    };
    size_t lines_held = st.entries.size();  // entries numbered or about to be
    bool have_prev = false;                 // a chunk of this input was parsed in the round before
    for (;;) {
      double w0 = cpu ? Pass1Cpu::Wall() : 0;
      RawChunk raw = ahead.get();
      if (cpu) cpu->waiting += Pass1Cpu::Wall() - w0;
      if (!raw.status.ok()) return raw.status;
      if (lines_held + raw.size() > kMaxEntries) {
        return Status::Limit(spec.path + ": this run would hold more than " + std::to_string(kMaxEntries) +
                             " lines, the most one run holds; split the inputs into parts (docs/scale.md)");
      }
      lines_held += raw.size();
      const bool eof = raw.eof;
      if (!eof) ahead = std::async(std::launch::async, ReadChunk, std::ref(reader), std::move(spare));
      stats.lines += raw.lines;
      stats.blank_lines += raw.blank_lines;
      round(have_prev ? &prev_raw : nullptr, &raw);
      have_prev = true;
      std::swap(observing, parsing);
      progress.Tick(spec.name, stats.lines, raw.bytes_read);
      spare = std::move(prev_raw);
      prev_raw = std::move(raw);
      if (eof) {
        round(&prev_raw, nullptr);  // the last chunk's records
        progress.InputDone(prev_raw.bytes_read);
        break;
      }
    }
    BaseEvidence evidence;
    for (const auto& r : parsers) evidence.Add(r->base_evidence());
    if (part) {
      InputIngest& got = (*ingest)[in];
      got.tallies = std::move(tallies);
      got.evidence = evidence;
      got.at_file_end = reader.at_file_end();
      continue;
    }
    if (Status s = CheckInputSanity(plan, spec, stats, tallies, evidence); !s.ok()) return s;
  }
  return Status::Ok();
}

}  // namespace

// Counts every entry's decision into its input's figures and the run's.
RunOutcome CountLedger(RunState& st) {
  RunOutcome outcome;
  for (size_t i = 0; i < st.entries.size(); ++i) {
    InputStats& is = st.inputs[st.entries[i].input];
    if (st.decisions[i].rejected) {
      ++is.rejected;
      ++is.rejected_by_reason[std::string(st.ReasonOf(st.decisions[i]))];
      ++outcome.rejected;
    } else {
      ++is.kept;
      ++outcome.kept;
    }
  }
  outcome.entries = st.entries.size();
  for (const auto& is : st.inputs) outcome.blank_lines += is.blank_lines;
  return outcome;
}

std::string OutputName(const Plan& plan, const std::string& split, uint32_t input) {
  bool same_layout = true;
  for (const auto& in : plan.inputs) same_layout = same_layout && in.layout_key == plan.inputs[0].layout_key;
  if (same_layout) return split + ".jsonl";
  return split + "." + plan.inputs[input].name + ".jsonl";
}

Json RejectExamples(const Plan& plan, const RunState& st) {
  Json examples = Json::array();
  std::set<std::pair<std::string_view, std::string_view>> seen;
  for (size_t i = 0; i < st.entries.size(); ++i) {
    const Decision& d = st.decisions[i];
    const std::string_view stage = st.StageOf(d), reason = st.ReasonOf(d);
    if (!d.rejected || stage.empty() || !seen.insert({stage, reason}).second) continue;
    const Entry& e = st.entries[i];
    const RejectText& t = st.RejectTextOf(d);
    Json j;  // the texts as rejects.jsonl writes them (invalid UTF-8 replaced)
    j["input"] = plan.inputs[e.input].name;
    j["id"] = e.record >= 0 ? Json(st.records[e.record].id) : t.id.empty() ? Json(nullptr) : Json(t.id);
    j["field"] = t.field;
    j["message"] = t.message;
    j = Json::parse(j.dump(-1, ' ', false, Json::error_handler_t::replace));
    Json ex{{"stage", std::string(stage)}, {"reason", std::string(reason)}, {"input", j["input"]}};
    ex["line"] = e.line;
    ex["id"] = j["id"];
    if (!t.field.empty()) ex["field"] = j["field"];
    ex["message"] = j["message"];
    examples.push_back(std::move(ex));
  }
  return examples;
}

std::string RejectLine(const Plan& plan, const RunState& st, const Entry& e, const Decision& d, std::string_view raw) {
  Json j;
  j["input"] = plan.inputs[e.input].name;
  j["file"] = plan.inputs[e.input].path;
  j["line"] = e.line;
  const RejectText& t = st.RejectTextOf(d);
  j["id"] = e.record >= 0 ? Json(st.records[e.record].id) : t.id.empty() ? Json(nullptr) : Json(t.id);
  const std::string_view reason = st.ReasonOf(d);
  j["stage"] = st.StageOf(d);
  j["reason"] = reason;
  if (!t.field.empty()) j["field"] = t.field;
  j["message"] = t.message;
  // Every text above comes from the run, but a message or id may quote input
  // bytes: invalid UTF-8 there is replaced (U+FFFD), never thrown on; the
  // record itself is kept losslessly below.
  std::string head = j.dump(-1, ' ', false, Json::error_handler_t::replace);
  head.pop_back();  // reopen the object to append raw JSON without re-serialising it
  if (!t.detail.empty()) head += ",\"detail\":" + t.detail;
  if (reason == "line_too_long") {
    head += ",\"record_omitted\":\"longer than the line limit; see file and line\"";
  } else if (!IsValidUtf8(raw)) {
    // Not UTF-8 (whatever reason rejected it): the exact bytes, as base64.
    head += ",\"record_base64\":\"" + Base64(raw) + "\"";
  } else if (e.record >= 0 || (reason != "not_json" && reason != "json_too_deep" && Json::accept(raw))) {
    // A parsed record, or a line that is JSON but not a usable record: as it is.
    head += ",\"record\":";
    head.append(raw);
  } else {
    head += ",\"record_text\":";
    AppendJsonString(raw, &head);  // the bytes of Json(std::string(raw)).dump()
  }
  head += "}\n";
  return head;
}

namespace {

// Collects path-valued settings wherever they sit in a stage's section.
void CollectSettingPaths(const Json& j, const std::string& key, const std::string& base, const std::string& stage,
                         std::vector<ReadPath>* out) {
  if (j.is_object()) {
    for (auto it = j.begin(); it != j.end(); ++it) CollectSettingPaths(it.value(), it.key(), base, stage, out);
  } else if (j.is_array()) {
    for (const auto& v : j) CollectSettingPaths(v, key, base, stage, out);
  } else if (j.is_string()) {
    const std::string v = j.get<std::string>();
    const bool pathish = key == "path" || key == "key_file" || key == "previous" || key == "rules_dir" ||
                         (key == "packs" && (v.find('/') != std::string::npos ||
                                             (v.size() > 5 && v.compare(v.size() - 5, 5, ".json") == 0)));
    if (pathish && !v.empty()) out->push_back({ResolvePlanPath(base, v), "file named by stages." + stage + "." + key});
  }
}

}  // namespace

void InputIngest::Add(const InputIngest& later) {
  for (const auto& [reason, t] : later.tallies) {
    IngestTally& mine = tallies[reason];
    if (mine.count == 0) {
      mine = t;
    } else {
      mine.count += t.count;
    }
  }
  evidence.Add(later.evidence);
  at_file_end = later.at_file_end;
}

Status MakeRunStages(const Plan& plan, const std::vector<std::string>& names, FileSystem* fs,
                     std::vector<std::unique_ptr<Stage>>* out) {
  std::vector<std::unique_ptr<Stage>>& stages = *out;
  for (const auto& info : AllStages()) {
    if (std::find(names.begin(), names.end(), info.name) == names.end()) continue;
    const Json& settings = StageSettings(plan, info.name);
    if (settings.contains("enabled") && settings["enabled"].is_boolean() && !settings["enabled"].get<bool>()) continue;
    Status err;
    auto stage = info.make(plan, fs, &err);
    if (!stage) return err.ok() ? Status::Internal(std::string("stage ") + info.name + " failed to start") : err;
    stages.push_back(std::move(stage));
  }
  for (auto it = plan.stages.begin(); it != plan.stages.end(); ++it) {
    bool known = false;
    for (const auto& info : AllStages()) known = known || it.key() == info.name;
    if (!known) {
      std::string names;
      for (const auto& info : AllStages()) names += std::string(names.empty() ? "" : ", ") + info.name;
      return Status::Usage("stages." + it.key() + ": unknown stage (known: " + names + ")");
    }
  }
  return Status::Ok();
}

Status ObserveInputs(const Plan& plan, RunState& st, std::vector<std::unique_ptr<Stage>>& stages, FileSystem* fs,
                     const Part* part, std::vector<InputIngest>* ingest) {
  if (part && (part->input >= plan.inputs.size() || !ingest)) {
    return Status::Usage("part " + std::to_string(part->part) + " names input " + std::to_string(part->input) +
                         ", but the plan has " + std::to_string(plan.inputs.size()) + " input(s)");
  }
  if (ingest) ingest->resize(plan.inputs.size());
  ThreadPool pool(plan.threads);  // 0: one per hardware thread
  Progress progress(false, false, 5, stderr, 0);  // silent
  return Observe(plan, st, stages, fs, pool, progress, part, ingest);
}

Status CheckInputSanity(const Plan& plan, uint32_t input, const InputStats& stats, const InputIngest& ingest) {
  return CheckInputSanity(plan, plan.inputs[input], stats, ingest.tallies, ingest.evidence);
}

std::vector<ReadPath> PathsReadBy(const Plan& plan) {
  std::vector<ReadPath> reads;
  if (!plan.plan_path.empty()) reads.push_back({plan.plan_path, "plan"});
  for (const auto& in : plan.inputs) reads.push_back({in.path, "input"});
  const std::string base =
      plan.plan_path.empty() ? "" : std::filesystem::path(plan.plan_path).parent_path().string();
  for (auto it = plan.stages.begin(); it != plan.stages.end(); ++it) {
    CollectSettingPaths(it.value(), it.key(), base, it.key(), &reads);
  }
  return reads;
}

namespace {

using Stages = std::vector<std::unique_ptr<Stage>>;

// The output folder must not be, contain or lie inside anything the run reads.
Status CheckOutputIsClear(const Plan& plan, const PipelineOptions& options) {
  std::vector<ReadPath> reads = PathsReadBy(plan);
  reads.insert(reads.end(), options.also_reads.begin(), options.also_reads.end());
  if (std::find(options.stages.begin(), options.stages.end(), "screen") != options.stages.end()) {
    reads.push_back({DefaultRulesDir(), "rules folder"});
  }
  return CheckOutputClear(plan.output, reads);
}

// The stages' own files (they need the decisions only, not pass 2).
Status WriteStageOutputs(const PipelineOptions& options, const RunState& st, const Stages& stages, OutputDir& out) {
  for (const auto& stage : stages) {
    if (Status s = stage->WriteOutputs(st, out); !s.ok()) return s;
  }
  if (options.companion) {
    if (Status s = options.companion->WriteOutputs(st, out); !s.ok()) return s;
  }
  return Status::Ok();
}

// The ledger invariant: every entry is in exactly one output.
Status CheckLedger(const RunOutcome& outcome, const std::map<std::string, uint64_t>& written) {
  uint64_t out_lines = 0;
  for (const auto& [name, n] : written) out_lines += n;
  if (outcome.kept + outcome.rejected != outcome.entries || out_lines != outcome.entries) {
    return Status::Internal("the ledger does not balance (input " + std::to_string(outcome.entries) + ", kept " +
                            std::to_string(outcome.kept) + ", rejected " + std::to_string(outcome.rejected) +
                            ", lines written " + std::to_string(out_lines) + "); nothing was written");
  }
  return Status::Ok();
}

}  // namespace

Result<Json> DecideStages(const Plan& plan, Stages& stages, RunCompanion* companion, StageContext& ctx,
                          const std::vector<std::string>& command_stages, RunOutcome* outcome,
                          const std::function<void(const std::string&)>& mark) {
  ReturnFreeMemory();  // pass 1's buffers, before ObserveDone builds what Decide needs
  for (auto& stage : stages) stage->ObserveDone(ctx.run);
  ReturnFreeMemory();
  if (mark) mark("decide (end of pass 1)");
  for (auto& stage : stages) {
    if (Status s = stage->Decide(ctx); !s.ok()) return s;
    ReturnFreeMemory();  // the step's working set, before the next step and pass 2
    if (mark) mark("decide " + stage->name());
  }
  if (companion) {
    if (Status s = companion->Decide(ctx); !s.ok()) return s;
  }
  RunState& st = ctx.run;
  *outcome = CountLedger(st);
  GateFigures figures;
  figures.records_in = outcome->entries;
  figures.kept = outcome->kept;
  for (const auto& is : st.inputs) figures.parsed += is.records;
  for (auto& stage : stages) {
    figures.stages_ran.insert(stage->name());
    stage->Figures(st, &figures);
  }
  if (companion) figures.stages_ran.insert(companion->name());
  Json gate = DecideGate(plan, figures, command_stages, &outcome->gate_failed);
  if (mark) mark("gate");
  return gate;
}

std::vector<std::pair<std::string, Json>> StageSections(const Stages& stages, const RunCompanion* companion,
                                                        const RunState& st) {
  std::vector<std::pair<std::string, Json>> sections;
  for (const auto& stage : stages) {
    Json sec = Json::object();
    stage->Report(st, &sec);
    sections.emplace_back(stage->name(), std::move(sec));
  }
  if (companion) {
    Json sec = Json::object();
    companion->Report(st, &sec);
    sections.emplace_back(companion->name(), std::move(sec));
  }
  return sections;
}

Result<RunOutcome> RunPipeline(const Plan& plan, const PipelineOptions& options, FileSystem* fs, std::FILE* log) {
  // The run's wall-clock start and duration for the provenance (finish.h:
  // replaced by SOURCE_DATE_EPOCH in the reproducible mode).
  const auto wall_start = std::chrono::system_clock::now();
  const auto steady_start = std::chrono::steady_clock::now();
  if (plan.inputs.empty()) return Status::Usage("no input files: name them on the command line or in the plan's \"inputs\"");
  if (plan.output.empty()) return Status::Usage("no output folder: pass --out DIR or set \"output\" in the plan");
  PhaseTimer timer(options.timings, log);
  Stages stages;
  if (Status s = MakeRunStages(plan, options.stages, fs, &stages); !s.ok()) return s;
  if (Status s = ValidateFinishPlan(plan); !s.ok()) return s;
  if (Status s = CheckOutputIsClear(plan, options); !s.ok()) return s;
  // Inputs' SHA-256 while pass 2 reads them, outputs' while they are written
  // (the provenance then reads neither again). Pass 2, not pass 1: pass 1
  // keeps every core busy, pass 2 mostly waits for the disk, and it reads
  // every input to its end too (docs/performance.md, ninth session).
  DigestingFileSystem digesting(fs);
  auto out = OutputDir::Begin(&digesting, plan.output, plan.overwrite);
  if (!out.ok()) return out.status();

  // Observe: pass 1.
  ThreadPool pool(plan.threads);  // 0: one per hardware thread
  RunState st(plan);
  Progress progress(options.progress, options.progress_lines, options.progress_seconds, log, InputBytes(plan));
  timer.Mark("set-up");  // the stages' own set-up (evaluation index, rule packs) and the output folder
  std::optional<Pass1Cpu> cpu;
  if (options.timings) cpu.emplace(stages.size(), pool.size());
  Status s = Observe(plan, st, stages, fs, pool, progress, nullptr, nullptr, cpu ? &*cpu : nullptr);
  progress.Done();
  if (!s.ok()) return s;
  timer.Mark("observe (pass 1)");
  if (cpu) {
    timer.Note("read and facts", cpu->Total(0));
    for (size_t k = 0; k < stages.size(); ++k) timer.Note("observe " + stages[k]->name(), cpu->Total(1 + k));
    timer.Note("in order (beside parsing)", cpu->InOrder());
    timer.NoteWall("waiting for input", cpu->waiting);
    timer.NoteWall("in order", cpu->Waited());
  }

  // Decide, the gate last.
  StageResults results;
  results.want_signatures = options.want_signatures;
  StageContext ctx{plan, fs, st, results, options.prior};
  RunOutcome outcome;
  auto gate = DecideStages(plan, stages, options.companion, ctx, options.stages, &outcome,
                           [&](const std::string& step) { timer.Mark(step); });
  if (!gate.ok()) return gate.status();

  // Apply: pass 2, and beside it the stages' own files and summary sections,
  // which need only the decisions (pass 2 reads them too and changes
  // nothing the stages keep): pass 2 is mostly the disk's time and leaves
  // the cores idle. One after the other with --threads 1. Either's error is
  // returned after both have stopped, pass 2's first.
  std::map<std::string, uint64_t> written;
  std::optional<Result<std::vector<std::pair<std::string, Json>>>> sections;
  Beside stage_files(plan.threads != 1, [&] {
    Status files = WriteStageOutputs(options, st, stages, *out.value());
    if (files.ok()) sections = StageSections(stages, options.companion, st);
    else sections = std::move(files);
  });
  s = ApplyInputs(plan, st, stages, &digesting, *out.value(), nullptr, &written, &pool, &progress);
  progress.Done();
  timer.Mark("apply (pass 2)");
  if (!s.ok()) return s;  // (stage_files' destructor waits for its thread first)
  stage_files.Wait();
  if (!sections->ok()) return sections->status();
  timer.Mark(stage_files.on_thread() ? "stage outputs (after pass 2)" : "stage outputs");
  if (s = CheckLedger(outcome, written); !s.ok()) return s;

  // Render: summary, provenance, datasheet, report; then the folder appears.
  Json summary = BuildSummary(plan, st, std::move(*sections).value(), written);
  timer.Mark("summary");
  RunClock clock;
  clock.start_unix_seconds = std::chrono::duration_cast<std::chrono::seconds>(wall_start.time_since_epoch()).count();
  clock.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - steady_start).count();
  std::vector<std::optional<FileDigest>> input_digests;
  for (const auto& in : plan.inputs) input_digests.push_back(digesting.DigestOf(in.path));
  s = FinishSummary(plan, fs, *out.value(), &summary, gate.value(), RejectExamples(plan, st), clock, input_digests,
                    &digesting);  // examples and provenance
  if (!s.ok()) return s;
  timer.Mark("provenance");
  s = out.value()->Write("summary.json", summary.dump(2) + "\n");
  if (s.ok()) s = WriteDocuments(plan, fs, *out.value(), summary);  // datasheet.md/json, report.html
  if (!s.ok()) return s;
  timer.Mark("datasheet and report");
  s = out.value()->Commit();
  if (!s.ok()) return s;
  if (options.table) PrintLedgerTable(summary, log);
  return outcome;
}

}  // namespace prefsift
