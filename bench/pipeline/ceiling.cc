// ceiling: the machine's limit for one JSONL file, single thread, for
// scripts/bench.sh to compare the pipeline against.
//
//   ceiling FILE
//
// Prints three timings over the same file, each a separate pass reading it in
// 64 MiB blocks cut at the last newline; parse and hash time only their own
// work (the block reads are excluded):
//   read   - the bytes only (file system / page cache, fread)
//   parse  - simdjson ondemand iterate_many over every line, unescaping the
//            "prompt" string and every string of "candidates" (what any stage
//            needs at least)
//   hash   - XXH3_128bits over every byte (plain, not the _dispatch variant)
// as  `name seconds MB/s records/s`  lines, and a final `ceiling` line with
// read + parse + hash (seconds summed): the fastest a one-thread pass that
// reads, parses and hashes everything could be.
#include <simdjson.h>
#include <xxhash.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <string_view>
#include <vector>

namespace {

constexpr size_t kBlock = 64u << 20;

// Calls fn(block) for newline-terminated blocks of the file; returns bytes read.
template <typename Fn>
uint64_t ForEachBlock(const char* path, Fn fn) {
  std::FILE* f = std::fopen(path, "rb");
  if (!f) { std::perror(path); std::exit(1); }
  std::vector<char> buf(kBlock + simdjson::SIMDJSON_PADDING);
  size_t carry = 0;
  uint64_t total = 0;
  for (;;) {
    size_t got = std::fread(buf.data() + carry, 1, kBlock - carry, f);
    total += got;
    size_t have = carry + got;
    if (have == 0) break;
    size_t cut = have;
    if (got != 0) {
      while (cut > 0 && buf[cut - 1] != '\n') --cut;
      if (cut == 0) { std::fprintf(stderr, "a line is longer than the block\n"); std::exit(1); }
    }
    fn(std::string_view(buf.data(), cut), buf.size() - cut);
    carry = have - cut;
    std::memmove(buf.data(), buf.data() + cut, carry);
    if (got == 0) break;
  }
  std::fclose(f);
  return total;
}

double Now() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

void Print(const char* name, double s, uint64_t bytes, uint64_t records) {
  std::printf("%-7s %8.3f s %9.1f MB/s %11.0f records/s\n", name, s, bytes / 1e6 / s, records / s);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: ceiling FILE.jsonl\n");
    return 2;
  }
  const char* path = argv[1];
  uint64_t sink = 0, records = 0;

  double t0 = Now();
  uint64_t bytes = ForEachBlock(path, [&](std::string_view b, size_t) { sink += uint8_t(b[b.size() / 2]); });
  double read_s = Now() - t0;

  simdjson::ondemand::parser parser;
  double parse_s = 0;
  ForEachBlock(path, [&](std::string_view b, size_t) {
    double t = Now();
    // The buffer has SIMDJSON_PADDING spare bytes after the block.
    simdjson::ondemand::document_stream docs;
    if (parser.iterate_many(b.data(), b.size(), 1u << 22).get(docs)) { std::fprintf(stderr, "iterate_many failed\n"); std::exit(1); }
    for (auto doc : docs) {
      simdjson::ondemand::object obj;
      if (doc.get_object().get(obj)) continue;
      ++records;
      std::string_view s;
      if (!obj["prompt"].get_string().get(s)) sink += s.size();
      simdjson::ondemand::array arr;
      if (!obj["candidates"].get_array().get(arr)) {
        for (auto v : arr) {
          if (!v.get_string().get(s)) sink += s.size();
        }
      }
    }
    parse_s += Now() - t;
  });

  double hash_s = 0;
  ForEachBlock(path, [&](std::string_view b, size_t) {
    double t = Now();
    XXH128_hash_t h = XXH3_128bits(b.data(), b.size());
    sink += h.low64;
    hash_s += Now() - t;
  });

  std::printf("file %s: %llu bytes, %llu records\n", path, static_cast<unsigned long long>(bytes),
              static_cast<unsigned long long>(records));
  Print("read", read_s, bytes, records);
  Print("parse", parse_s, bytes, records);
  Print("hash", hash_s, bytes, records);
  Print("ceiling", read_s + parse_s + hash_s, bytes, records);
  std::fprintf(stderr, "(sink %llu)\n", static_cast<unsigned long long>(sink));
  return 0;
}
