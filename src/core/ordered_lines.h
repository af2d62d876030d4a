// Writes a file of lines made per item, items in order, the lines of blocks
// of items made in parallel: a round of blocks at a time (bounded memory),
// appended in item order, so the file is the same at any thread count.
// Stages use it for their files of a line per record or finding.
#pragma once

#include <algorithm>
#include <string>
#include <vector>

#include "core/file_system.h"
#include "core/status.h"
#include "core/thread_pool.h"

namespace prefsift {

// Calls lines_of(i, &text) for every i in [0, n) (it appends item i's lines,
// or nothing) on `threads` threads (0: one per hardware thread) and appends
// the text to *f in item order; the first write error is returned. Does not
// close *f.
template <typename LinesOf>
Status AppendLinesInOrder(WritableFile* f, size_t n, unsigned threads, const LinesOf& lines_of) {
  constexpr size_t kBlock = 4096, kRound = 64;
  const size_t blocks = (n + kBlock - 1) / kBlock;
  ThreadPool pool(threads);
  std::vector<std::string> text(kRound);
  for (size_t first = 0; first < blocks; first += kRound) {
    const size_t count = std::min(kRound, blocks - first);
    pool.ParallelFor(count, [&](size_t b, unsigned) {
      std::string& t = text[b];
      t.clear();
      const size_t begin = (first + b) * kBlock;
      for (size_t i = begin; i < std::min(n, begin + kBlock); ++i) lines_of(i, &t);
    });
    for (size_t b = 0; b < count; ++b) {
      if (text[b].empty()) continue;
      if (Status s = f->Append(text[b]); !s.ok()) return s;
    }
  }
  return Status::Ok();
}

}  // namespace prefsift
