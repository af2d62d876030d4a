// Pass 2 (apply): every entry's line to its split file or rejects.jsonl; see
// passes.h.
//
// The input is read in chunks on one thread (lines copied back to back into
// one buffer and matched to their entries), the pool builds the lines that
// change (a record a stage rewrites, a rejects.jsonl line) in parallel, and
// the calling thread hands each chunk's lines to the writer in input order.
// Kept lines that no stage changes are copied by byte range, never parsed.
#include <nlohmann/json.hpp>

#include <future>
#include <map>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "core/blank.h"
#include "core/json_dump.h"
#include "core/json_parse.h"
#include "core/thread_pool.h"
#include "io/line_reader.h"
#include "pipeline/passes.h"
#include "pipeline/progress.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// A chunk ends at this many lines or bytes, whichever comes first. Two chunks
// are in memory at once (one read ahead), plus the changed lines.
constexpr size_t kChunkLines = 4096;
constexpr size_t kChunkBytes = 16u << 20;

// Pass 2's writes, batched per output file and handed to one background
// thread, so building lines and writing them overlap. Batches are written
// strictly in order (one in flight at a time); the first error stops
// everything and is returned by Flush or Finish. A written batch's buffers
// come back and take the next batch (cleared, their capacity kept), so a run
// does not allocate and fault in fresh megabytes for every batch.
class BatchedWriter {
 public:
  ~BatchedWriter() { (void)Finish(); }
  // Queues bytes for `f` (in call order per file).
  Status Append(WritableFile* f, std::string_view bytes) {
    auto& buf = pending_[f];
    buf.append(bytes);
    pending_bytes_ += bytes.size();
    return pending_bytes_ >= kBatchBytes ? Flush() : Status::Ok();
  }
  Status Flush() {
    Status s = Wait();
    if (!s.ok() || pending_bytes_ == 0) return s;
    in_flight_ = std::async(std::launch::async, [batch = std::move(pending_)]() mutable {
      Status ws = Status::Ok();
      for (const auto& [f, bytes] : batch) {
        if (!bytes.empty()) ws = f->Append(bytes);
        if (!ws.ok()) break;
      }
      return Written{std::move(ws), std::move(batch)};
    });
    pending_ = std::move(spare_);
    for (auto& [f, bytes] : pending_) bytes.clear();
    spare_.clear();
    pending_bytes_ = 0;
    return Status::Ok();
  }
  Status Finish() {
    Status s = Flush();
    Status w = Wait();
    return s.ok() ? w : s;
  }

 private:
  static constexpr size_t kBatchBytes = 8u << 20;
  using Batch = std::map<WritableFile*, std::string>;  // order between files does not matter
  struct Written {
    Status status;
    Batch buffers;
  };
  Status Wait() {
    if (!in_flight_.valid()) return Status::Ok();
    Written w = in_flight_.get();
    spare_ = std::move(w.buffers);
    return w.status;
  }
  Batch pending_, spare_;
  size_t pending_bytes_ = 0;
  std::future<Written> in_flight_;
};

// Lines of one input as read, each matched to its entry.
struct ApplyChunk {
  std::string bytes;                // the lines back to back, without their newlines
  std::vector<size_t> begins{0};    // line k is bytes[begins[k], begins[k + 1])
  std::vector<size_t> entries;      // line k's entry index
  bool end = false;                 // the input has no more lines
  uint64_t bytes_read = 0;          // the reader's position after the chunk
  Status status = Status::Ok();

  size_t size() const { return entries.size(); }
  std::string_view line(size_t k) const {
    return std::string_view(bytes).substr(begins[k], begins[k + 1] - begins[k]);
  }
};

// Reads the next chunk of input `in` into `c` (a written chunk's storage,
// reused so that its buffers are not allocated, faulted in and regrown for
// every chunk), advancing *cursor over the entries; an input that no longer
// matches the entries of pass 1 is an error.
ApplyChunk ReadChunk(LineReader& reader, const Plan& plan, const RunState& st, uint32_t in, size_t* cursor,
                     Progress* progress, ApplyChunk c) {
  c.bytes.clear();
  c.begins.assign(1, 0);
  c.entries.clear();
  c.end = false;
  c.status = Status::Ok();
  for (bool first = true; c.size() < kChunkLines && c.bytes.size() < kChunkBytes; first = false) {
    std::string_view line;
    uint64_t no = 0;
    auto next = reader.Read(&line, &no);
    if (!next.ok()) {
      c.status = next.status();
      return c;
    }
    if (next.value() == LineReader::Next::kEnd) {
      c.end = true;
      break;
    }
    if (first) progress->Tick(plan.inputs[in].name, no, reader.bytes_read());  // a chunk's first line
    if (next.value() == LineReader::Next::kLine && IsBlank(line)) continue;
    if (*cursor >= st.entries.size() || st.entries[*cursor].input != in || st.entries[*cursor].line != no) {
      c.status = Status::Input(plan.inputs[in].path + " changed while prefsift was reading it (line " +
                               std::to_string(no) + "); nothing was written");
      return c;
    }
    // A line over the limit was rejected unread in pass 1; its reject line
    // names file and line only.
    if (next.value() == LineReader::Next::kLine) c.bytes.append(line);
    c.begins.push_back(c.bytes.size());
    c.entries.push_back((*cursor)++);
  }
  c.bytes_read = reader.bytes_read();
  return c;
}

bool StagesRewrite(const std::vector<std::unique_ptr<Stage>>& stages, const Entry& e) {
  if (e.record < 0) return false;
  for (const auto& s : stages) {
    if (s->Rewrites(static_cast<size_t>(e.record))) return true;
  }
  return false;
}

// The line as written for entry `entry` (`raw` as read): when `rewrite`
// (StagesRewrite), rewritten by the stages that change its record (kept or rejected, only the changed form is
// written), then, when rejected, wrapped in its rejects.jsonl line.
Status BuildLine(const Plan& plan, const RunState& st, const std::vector<std::unique_ptr<Stage>>& stages,
                 size_t entry, bool rewrite, std::string_view raw, std::string* out) {
  const Entry& e = st.entries[entry];
  const Decision& d = st.decisions[entry];
  std::string rewritten;
  if (rewrite) {
    const size_t r = static_cast<size_t>(e.record);
    // The tree nlohmann's parse would build, made from simdjson's DOM
    // (core/json_parse.h); what that declines, nlohmann parses, without
    // exceptions: simdjson accepted this line in pass 1, so a disagreement
    // between the two parsers is an error value, never an abort.
    Json doc;
    if (!ParseJsonFast(raw, &doc)) doc = Json::parse(raw, nullptr, /*allow_exceptions=*/false);
    if (doc.is_discarded()) {
      return Status::Internal(plan.inputs[e.input].path + ":" + std::to_string(e.line) +
                              ": the record parsed in pass 1 but not when rewriting it; nothing was written");
    }
    for (const auto& stage : stages) {
      if (!stage->Rewrites(r)) continue;
      Status rs = stage->Rewrite(r, plan.inputs[e.input], &doc);
      if (!rs.ok()) return rs;
    }
    rewritten.reserve(raw.size() + raw.size() / 8 + 16);
    AppendCompactJson(doc, &rewritten);  // the bytes of doc.dump()
    raw = rewritten;
  }
  *out = d.rejected ? RejectLine(plan, st, e, d, raw) : std::move(rewritten);
  return Status::Ok();
}

// The pass's output files: every split file of every input exists, even
// when empty, so downstream jobs find them; rejects.jsonl last.
class ApplyFiles {
 public:
  Status Open(const Plan& plan, const RunState& st, OutputDir& out) {
    splits_ = st.split_names.size();
    for (uint32_t in = 0; in < plan.inputs.size(); ++in) {
      for (const auto& split : st.split_names) {
        auto f = File(OutputName(plan, split, in), out);
        if (!f.ok()) return f.status();
        by_place_.push_back(f.value());
      }
    }
    kept_.assign(by_place_.size(), 0);
    auto r = File("rejects.jsonl", out);
    if (!r.ok()) return r.status();
    rejects_ = r.value();
    return Status::Ok();
  }
  // Index of the file a kept line of input `in` in split `split` goes to
  // (places of several inputs can share a file).
  size_t Place(uint32_t in, uint32_t split) const { return in * splits_ + split; }
  WritableFile* At(size_t place) const { return by_place_[place]; }
  WritableFile* rejects() const { return rejects_; }
  // One more line written at `place`, or to rejects.jsonl.
  void CountKept(size_t place) { ++kept_[place]; }
  void CountRejected() { ++rejected_; }
  // Closes every file; lines written per file name are added to *written.
  Status Close(std::map<std::string, uint64_t>* written) {
    std::map<const WritableFile*, uint64_t> lines{{rejects_, rejected_}};
    for (size_t p = 0; p < by_place_.size(); ++p) lines[by_place_[p]] += kept_[p];
    for (auto& [name, f] : files_) {
      (*written)[name] += lines[f.get()];
      Status s = f->Close();
      if (!s.ok()) return s;
    }
    return Status::Ok();
  }

 private:
  Result<WritableFile*> File(const std::string& name, OutputDir& out) {
    auto it = files_.find(name);
    if (it != files_.end()) return it->second.get();
    auto f = out.CreateStream(name);
    if (!f.ok()) return f.status();
    return (files_[name] = std::move(f).value()).get();
  }
  std::map<std::string, std::unique_ptr<WritableFile>> files_;
  std::vector<WritableFile*> by_place_;
  WritableFile* rejects_ = nullptr;
  size_t splits_ = 1;
  std::vector<uint64_t> kept_;  // lines written per place
  uint64_t rejected_ = 0;
};

// Builds the changed lines of one chunk on the pool; the first error in
// input order wins, so a failing run reports the same line at any thread count.
Status BuildChunk(const Plan& plan, const RunState& st, const std::vector<std::unique_ptr<Stage>>& stages,
                  const ApplyChunk& c, ThreadPool& pool, std::vector<size_t>* todo,
                  std::vector<std::string>* made) {
  todo->clear();
  std::vector<uint8_t> rewrite;  // per todo line: a stage rewrites its record
  for (size_t k = 0; k < c.size(); ++k) {
    const bool r = StagesRewrite(stages, st.entries[c.entries[k]]);
    if (!r && !st.decisions[c.entries[k]].rejected) continue;
    todo->push_back(k);
    rewrite.push_back(r);
  }
  made->resize(todo->size());
  std::vector<Status> errors(todo->size(), Status::Ok());
  pool.ParallelFor(todo->size(), [&](size_t j, unsigned) {
    const size_t k = (*todo)[j];
    errors[j] = BuildLine(plan, st, stages, c.entries[k], rewrite[j] != 0, c.line(k), &(*made)[j]);
  });
  for (const Status& s : errors) {
    if (!s.ok()) return s;
  }
  return Status::Ok();
}

// Hands one chunk's lines to the writer in input order.
Status WriteChunk(const RunState& st, uint32_t in, const ApplyChunk& c, const std::vector<size_t>& todo,
                  const std::vector<std::string>& made, ApplyFiles& files, BatchedWriter& writer) {
  size_t j = 0;
  for (size_t k = 0; k < c.size(); ++k) {
    const Decision& d = st.decisions[c.entries[k]];
    const bool changed = j < todo.size() && todo[j] == k;
    if (d.rejected) {
      if (Status s = writer.Append(files.rejects(), made[j]); !s.ok()) return s;
      files.CountRejected();
    } else {
      const size_t place = files.Place(in, d.split);
      WritableFile* f = files.At(place);
      Status s = writer.Append(f, changed ? std::string_view(made[j]) : c.line(k));
      if (s.ok()) s = writer.Append(f, "\n");
      if (!s.ok()) return s;
      files.CountKept(place);
    }
    j += changed;
  }
  return Status::Ok();
}

}  // namespace

Status ApplyInputs(const Plan& plan, RunState& st, std::vector<std::unique_ptr<Stage>>& stages, FileSystem* fs,
                   OutputDir& out, const Part* part, std::map<std::string, uint64_t>* written, ThreadPool* pool,
                   Progress* progress) {
  std::unique_ptr<ThreadPool> own_pool;
  if (!pool) pool = (own_pool = std::make_unique<ThreadPool>(plan.threads)).get();  // 0: one per hardware thread
  Progress silent = Progress::Silent();
  if (!progress) progress = &silent;
  progress->Phase("writing");
  ApplyFiles files;
  if (Status s = files.Open(plan, st, out); !s.ok()) return s;
  BatchedWriter writer;  // after `files`: destroyed (and drained) before the files it writes

  size_t cursor = 0;
  std::vector<size_t> todo;
  std::vector<std::string> made;
  for (uint32_t in = 0; in < plan.inputs.size(); ++in) {
    if (part && in != part->input) continue;
    LineRange range;
    if (part) range = LineRange{part->begin, part->end.value_or(UINT64_MAX), part->first_line};
    auto opened = LineReader::Open(fs, plan.inputs[in].path, plan.limits.max_line_bytes, range);
    if (!opened.ok()) return opened.status();
    LineReader& reader = *opened.value();
    auto read = [&](ApplyChunk storage) {
      return ReadChunk(reader, plan, st, in, &cursor, progress, std::move(storage));
    };
    // The next chunk is read on its own thread while this one is built and
    // written; every path out of the loop waits for that read first. Two
    // chunks' storage take turns.
    ApplyChunk spare;
    std::future<ApplyChunk> ahead = std::async(std::launch::async, read, ApplyChunk());
    for (;;) {
      ApplyChunk c = ahead.get();
      if (!c.status.ok()) return c.status;
      if (!c.end) ahead = std::async(std::launch::async, read, std::move(spare));
      if (Status s = BuildChunk(plan, st, stages, c, *pool, &todo, &made); !s.ok()) return s;
      if (Status s = WriteChunk(st, in, c, todo, made, files, writer); !s.ok()) return s;
      if (c.end) {
        progress->InputDone(c.bytes_read);
        break;
      }
      spare = std::move(c);
    }
  }
  if (cursor != st.entries.size()) {
    return Status::Input("an input file got shorter while prefsift was reading it; nothing was written");
  }
  if (Status s = writer.Finish(); !s.ok()) return s;
  return files.Close(written);
}

}  // namespace prefsift
