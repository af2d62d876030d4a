// Cutting the inputs into parts (cut.h).
//
// Each plain input is read once. Its size is not known in advance (the file
// system seam has no size query, and a pipe has none), so the scan keeps a
// table of grid points: entry k is the first line start at or after byte k*g
// and that line's number. When the table grows past kMaxGrid entries the grid
// step g doubles and every other entry is dropped (the kept entries are still
// exact for the coarser grid). A cut aimed at byte t goes to the entry at or
// after t, so it lands on the first line start at or after t rounded up to
// the grid: exactly the first line start at or after t for inputs up to
// kMaxGrid bytes, and within g = size / (kMaxGrid / 2) at most above it for
// larger ones (an input of 1 TB: 16 MB). Memory: 16 bytes per entry, 2 MB
// per input at most.
#include "pipeline/cut.h"

#include <algorithm>
#include <cstring>
#include <filesystem>
#include <numeric>
#include <utility>

#include "io/line_reader.h"
#include "io/output_dir.h"
#include "pipeline/pipeline.h"

namespace prefsift {
namespace {

__extension__ typedef unsigned __int128 U128;  // exact i * size / k

constexpr size_t kMaxGrid = size_t{1} << 17;
constexpr size_t kReadBlock = size_t{1} << 20;

struct GridPoint {
  uint64_t offset;     // first line start at or after the grid point
  uint64_t line;       // its 1-based line number
};

// What one scan of a plain input found.
struct Scan {
  uint64_t size = 0;
  uint64_t lines = 0;  // lines in the file (a last line without LF counts)
  uint64_t step = 1;   // grid step g
  std::vector<GridPoint> grid;
};

class GridBuilder {
 public:
  // A line starts at `offset` with number `line`: it answers every grid point
  // at or before it that has no answer yet.
  void LineStart(uint64_t offset, uint64_t line) {
    while (next_ <= offset) {
      scan_.grid.push_back({offset, line});
      next_ += scan_.step;
      if (scan_.grid.size() > kMaxGrid) Coarsen();
    }
  }
  // The grid points up to the end answer to the end (an empty remainder).
  Scan Finish(uint64_t size, uint64_t lines) {
    LineStart(size, lines + 1);
    scan_.size = size;
    scan_.lines = lines;
    return std::move(scan_);
  }

 private:
  void Coarsen() {
    std::vector<GridPoint>& g = scan_.grid;
    size_t kept = 0;
    for (size_t i = 0; i < g.size(); i += 2) g[kept++] = g[i];
    g.resize(kept);
    scan_.step *= 2;
    next_ = kept * scan_.step;
  }
  Scan scan_;
  uint64_t next_ = 0;  // the next grid point without an answer
};

Result<Scan> ScanPlain(FileSystem* fs, const std::string& path) {
  auto f = fs->OpenRead(path);
  if (!f.ok()) return f.status();
  std::unique_ptr<ReadableFile> file = std::move(f).value();
  std::vector<char> buf(kReadBlock);
  GridBuilder grid;
  uint64_t pos = 0, newlines = 0;
  bool line_open = false;  // bytes seen since the last LF (or the start)
  for (;;) {
    auto got = file->Read(buf.data(), buf.size());
    if (!got.ok()) return got.status();
    size_t n = got.value();
    if (n == 0) break;
    const char* p = buf.data();
    const char* end = p + n;
    while (p < end) {
      if (!line_open) {
        grid.LineStart(pos + static_cast<uint64_t>(p - buf.data()), newlines + 1);
        line_open = true;
      }
      const void* lf = std::memchr(p, '\n', static_cast<size_t>(end - p));
      if (!lf) break;
      p = static_cast<const char*>(lf) + 1;
      ++newlines;
      line_open = false;
    }
    pos += n;
  }
  uint64_t lines = newlines + (line_open ? 1 : 0);
  return grid.Finish(pos, lines);
}

// floor(i * size / k) without overflow.
uint64_t Target(uint64_t i, uint64_t size, uint64_t k) {
  return static_cast<uint64_t>(static_cast<U128>(i) * size / k);
}

// The grid entry for a cut aimed at byte t.
GridPoint CutAt(const Scan& s, uint64_t t) {
  uint64_t k = t / s.step + (t % s.step ? 1 : 0);
  if (k < s.grid.size()) return s.grid[k];
  return GridPoint{s.size, s.lines + 1};
}

// Parts per plain input when `total` parts are shared by size.
std::vector<uint64_t> ShareParts(const std::vector<uint64_t>& sizes, uint64_t total) {
  size_t n = sizes.size();
  std::vector<uint64_t> parts(n, 1);
  if (n == 0) return parts;
  uint64_t extra = total - n;
  uint64_t sum = 0;
  for (uint64_t s : sizes) sum += s;
  std::vector<uint64_t> w = sizes;
  if (sum == 0) {  // every plain input is empty: share equally
    std::fill(w.begin(), w.end(), 1);
    sum = n;
  }
  std::vector<uint64_t> rem(n);
  uint64_t given = 0;
  for (size_t j = 0; j < n; ++j) {
    U128 q = static_cast<U128>(extra) * w[j];
    parts[j] += static_cast<uint64_t>(q / sum);
    given += static_cast<uint64_t>(q / sum);
    rem[j] = static_cast<uint64_t>(q % sum);
  }
  std::vector<size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](size_t a, size_t b) { return rem[a] > rem[b]; });
  for (size_t i = 0; given < extra; ++i, ++given) ++parts[order[i % n]];
  return parts;
}

}  // namespace

Result<std::vector<CutPart>> CutInputs(FileSystem* fs, const std::vector<std::string>& paths, const CutOptions& opts) {
  if ((opts.parts == 0) == (opts.part_bytes == 0)) {
    return Status::Usage("give either a number of parts or a size per part (one of them, above 0)");
  }
  if (paths.empty()) return Status::Usage("the plan names no inputs, so there is nothing to cut");
  if (opts.parts && opts.parts < paths.size()) {
    return Status::Usage(std::to_string(opts.parts) + " parts are too few: the plan has " +
                         std::to_string(paths.size()) + " inputs and each input is at least one part");
  }
  // Pass over every input: compressed ones are whole parts; plain ones are scanned.
  std::vector<bool> compressed(paths.size());
  std::vector<Scan> scans(paths.size());
  std::vector<uint64_t> plain_sizes;
  for (size_t i = 0; i < paths.size(); ++i) {
    auto reader = LineReader::Open(fs, paths[i], 1);
    if (!reader.ok()) return reader.status();
    compressed[i] = reader.value()->compression() != Compression::kNone;
    if (compressed[i]) continue;
    auto scan = ScanPlain(fs, paths[i]);
    if (!scan.ok()) return scan.status();
    scans[i] = std::move(scan).value();
    plain_sizes.push_back(scans[i].size);
  }
  std::vector<uint64_t> shared;
  if (opts.parts) {
    uint64_t whole = static_cast<uint64_t>(std::count(compressed.begin(), compressed.end(), true));
    shared = ShareParts(plain_sizes, opts.parts - whole);
  }
  std::vector<CutPart> out;
  size_t plain_index = 0;
  uint64_t total = 0;
  for (size_t i = 0; i < paths.size(); ++i) {
    total += compressed[i] ? 1 : opts.parts ? shared[plain_index++] : 0;
  }
  plain_index = 0;
  if (opts.part_bytes) {
    for (size_t i = 0; i < paths.size(); ++i) {
      total += compressed[i] ? 1 : std::max<uint64_t>(1, scans[i].size / opts.part_bytes + 1);
    }
  }
  if (total > UINT32_MAX) return Status::Usage("more than 4,294,967,295 parts asked for; cut into fewer");
  for (size_t i = 0; i < paths.size(); ++i) {
    CutPart part;
    part.input = i;
    part.path = paths[i];
    if (compressed[i]) {
      part.part = out.size();
      out.push_back(part);  // whole file: begin 0, no end, first line 1; lines unknown (0)
      continue;
    }
    const Scan& s = scans[i];
    uint64_t k = opts.parts ? shared[plain_index] : std::max<uint64_t>(1, s.size / opts.part_bytes +
                                                                               (s.size % opts.part_bytes ? 1 : 0));
    ++plain_index;
    GridPoint from{0, 1};
    for (uint64_t j = 1; j <= k; ++j) {
      GridPoint to = j == k ? GridPoint{s.size, s.lines + 1} : CutAt(s, Target(j, s.size, k));
      if (to.offset < from.offset) to = from;  // the grid is monotone; kept for safety
      part.part = out.size();
      part.begin = from.offset;
      part.end = to.offset;
      part.first_line = from.line;
      part.lines = to.line - from.line;
      out.push_back(part);
      from = to;
    }
  }
  return out;
}

std::vector<Part> ToParts(const std::vector<CutPart>& parts) {
  std::vector<Part> out;
  out.reserve(parts.size());
  for (const CutPart& c : parts) {
    Part p;
    p.part = static_cast<uint32_t>(c.part);
    p.input = static_cast<uint32_t>(c.input);
    p.path = c.path;
    p.begin = c.begin;
    p.end = c.end;
    p.first_line = c.first_line;
    out.push_back(std::move(p));
  }
  return out;
}

Result<std::vector<CutPart>> CutPlanToFile(FileSystem* fs, const Plan& plan, const CutOptions& opts,
                                           const std::string& out, bool overwrite) {
  if (out.empty()) return Status::Usage("name the parts file with --out FILE, e.g. --out work/parts.json");
  if (Status clear = CheckOutputClear(out, PathsReadBy(plan)); !clear.ok()) return clear;
  if (fs->IsDirectory(out)) return Status::Usage(out + " is a folder; --out names the parts file, e.g. " + out + "/parts.json");
  std::vector<std::string> paths;
  for (const auto& in : plan.inputs) paths.push_back(in.path);
  auto parts = CutInputs(fs, paths, opts);
  if (!parts.ok()) return parts.status();
  std::string text = PartsJson(ToParts(parts.value()));
  if (fs->Exists(out)) {
    std::string old;
    auto f = fs->OpenRead(out);
    if (!f.ok()) return f.status();
    std::vector<char> buf(1 << 16);
    for (;;) {
      auto got = f.value()->Read(buf.data(), buf.size());
      if (!got.ok()) return got.status();
      if (got.value() == 0) break;
      old.append(buf.data(), got.value());
    }
    if (old == text) return parts;
    if (!overwrite) {
      return Status::Usage(out + " exists and holds other parts (another plan, or another cut); give --overwrite to "
                           "replace it, and remove the state files made from the old parts");
    }
  }
  std::string folder = std::filesystem::path(out).parent_path().string();
  if (!folder.empty() && !fs->IsDirectory(folder)) {
    if (Status s = fs->MakeDir(folder); !s.ok()) return s;
  }
  if (Status s = WriteFileAtomically(fs, out, text); !s.ok()) return s;
  return parts;
}

}  // namespace prefsift
