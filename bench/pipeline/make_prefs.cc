// make_prefs: writes a synthetic preference dataset for the pipeline benchmark
// (bench/pipeline, scripts/bench.sh). Single-threaded, fixed seed: the same
// arguments give byte-identical files.
//
//   make_prefs N OUT_DIR [SEED] [EVAL]
//
// writes OUT_DIR/prefs-N.jsonl (layout: the "choice" preset plus /annotator,
// /source, /thread) and OUT_DIR/eval-N.jsonl (a small evaluation set of
// {"qid","question"} for the leakage stage).
//
// Shape (chosen to look like real preference data, not taken from any one set):
//   prompt 20-200 words, B = 2..4 answers of 50-600 words; lengths skewed
//   toward the short end (50 + 550*u^2 words: mean about 233).
//   planted at fixed rates: 1% exact duplicate records (same prompt and answers,
//   new id), 2% near-duplicate prompts (an earlier prompt with 2-4 words
//   changed), 0.5% prompts copied from the evaluation set, and personal data in
//   answers using only safe fake values: e-mail at example.com (1%), IPv4 in
//   192.0.2.0/24 (RFC 5737, 0.3%), NANP 555-01xx phones (0.3%), the published
//   test card 4111 1111 1111 1111 (0.1%).
//   200 annotators, 6 sources, threads of about 3 records.
#include <algorithm>
#include <cinttypes>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

namespace {

struct Rng {  // splitmix64
  uint64_t s;
  uint64_t Next() {
    uint64_t z = (s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
  }
  double U() { return (Next() >> 11) * (1.0 / 9007199254740992.0); }
  uint64_t Below(uint64_t n) { return Next() % n; }
};

std::vector<std::string> MakeVocab(Rng& r, size_t n) {
  static const char* on[] = {"b", "c", "d", "f", "g", "h", "l", "m", "n", "p", "r", "s", "t", "v", "w",
                             "br", "cl", "dr", "gr", "pl", "st", "th", "sh", "ch", "tr"};
  static const char* nu[] = {"a", "e", "i", "o", "u", "ea", "ai", "ou", "ie"};
  static const char* co[] = {"", "n", "r", "s", "t", "l", "nd", "st", "ng", "m"};
  std::vector<std::string> v;
  for (size_t i = 0; i < n; ++i) {
    std::string w;
    size_t syl = r.Below(4) == 0 ? 2 : 1;
    for (size_t k = 0; k < syl; ++k) {
      w += on[r.Below(sizeof on / sizeof *on)];
      w += nu[r.Below(sizeof nu / sizeof *nu)];
    }
    w += co[r.Below(sizeof co / sizeof *co)];
    v.push_back(w);
  }
  // Frequent words are short, as in natural text (mean about 5 letters per word read).
  std::stable_sort(v.begin(), v.end(), [](const std::string& a, const std::string& b) { return a.size() < b.size(); });
  return v;
}

// Zipf-like word choice: index = n * u^3 favours the head of the vocabulary.
const std::string& Word(Rng& r, const std::vector<std::string>& vocab) {
  double u = r.U();
  return vocab[static_cast<size_t>(u * u * u * vocab.size())];
}

std::string Sentence(Rng& r, const std::vector<std::string>& vocab, size_t words, bool question) {
  std::string s;
  for (size_t i = 0; i < words; ++i) {
    if (i) s += (i % 13 == 12) ? ". " : " ";
    s += Word(r, vocab);
  }
  s += question ? "?" : ".";
  return s;
}

size_t Skewed(Rng& r, size_t lo, size_t hi) {
  double u = r.U();
  return lo + static_cast<size_t>(u * u * (hi - lo));
}

void AppendJsonString(std::string* out, const std::string& s) {
  out->push_back('"');
  for (char c : s) {
    if (c == '"' || c == '\\') out->push_back('\\');
    out->push_back(c);
  }
  out->push_back('"');
}

std::string Pii(Rng& r) {
  double u = r.U();
  char buf[96];
  // Cumulative shares of the 1.7% of answers that carry personal data.
  if (u < 0.010 / 0.017) {
    std::snprintf(buf, sizeof buf, " Write to member%" PRIu64 "@example.com for the form.", r.Below(100000));
  } else if (u < 0.013 / 0.017) {
    std::snprintf(buf, sizeof buf, " The kiosk at 192.0.2.%" PRIu64 " logged it.", 1 + r.Below(254));
  } else if (u < 0.016 / 0.017) {
    std::snprintf(buf, sizeof buf, " Call (212) 555-01%02" PRIu64 " after six.", r.Below(100));
  } else {
    std::snprintf(buf, sizeof buf, " I paid with card 4111 1111 1111 1111 last time.");
  }
  return buf;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 3) {
    std::fprintf(stderr, "usage: make_prefs N OUT_DIR [SEED] [EVAL]\n");
    return 2;
  }
  uint64_t n = std::strtoull(argv[1], nullptr, 10);
  std::string dir = argv[2];
  Rng r{argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 20260401ull};
  std::vector<std::string> vocab = MakeVocab(r, 20000);

  // Evaluation set: EVAL questions when given (issue 9's target uses 50,000),
  // else 1 per 200 records, at least 500, at most 50000.
  uint64_t n_eval = argc > 4 ? std::strtoull(argv[4], nullptr, 10)
                             : std::min<uint64_t>(50000, std::max<uint64_t>(500, n / 200));
  std::vector<std::string> eval;
  std::string eval_path = dir + "/eval-" + std::to_string(n) + ".jsonl";
  std::FILE* ef = std::fopen(eval_path.c_str(), "wb");
  if (!ef) { std::perror(eval_path.c_str()); return 1; }
  std::string line;
  for (uint64_t i = 0; i < n_eval; ++i) {
    eval.push_back(Sentence(r, vocab, Skewed(r, 20, 120), true));
    line = "{\"qid\":\"q" + std::to_string(i) + "\",\"question\":";
    AppendJsonString(&line, eval.back());
    line += "}\n";
    std::fwrite(line.data(), 1, line.size(), ef);
  }
  std::fclose(ef);

  std::string path = dir + "/prefs-" + std::to_string(n) + ".jsonl";
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (!f) { std::perror(path.c_str()); return 1; }
  // Recent records kept for planting duplicates (a ring; copies come from the recent past).
  constexpr size_t kRing = 4096;
  std::vector<std::string> ring_prompt(kRing), ring_body(kRing);
  uint64_t thread = 0;
  for (uint64_t i = 0; i < n; ++i) {
    double u = r.U();
    std::string prompt, body;
    if (i > 100 && u < 0.01) {  // exact duplicate of a recent record
      size_t k = (i - 1 - r.Below(std::min<uint64_t>(i - 1, kRing - 1))) % kRing;
      prompt = ring_prompt[k];
      body = ring_body[k];
    } else {
      if (i > 100 && u < 0.03) {  // near duplicate prompt: a few words changed
        size_t k = (i - 1 - r.Below(std::min<uint64_t>(i - 1, kRing - 1))) % kRing;
        prompt = ring_prompt[k];
        for (int c = 2 + static_cast<int>(r.Below(3)); c > 0; --c) {
          size_t at = prompt.find(' ', r.Below(prompt.size()));
          if (at != std::string::npos) prompt.insert(at, " " + Word(r, vocab));
        }
      } else if (u < 0.035) {  // a leaked evaluation question
        prompt = eval[r.Below(eval.size())];
      } else {
        prompt = Sentence(r, vocab, Skewed(r, 20, 200), true);
      }
      size_t b = 2 + r.Below(3);
      body = "[";
      for (size_t c = 0; c < b; ++c) {
        std::string a = Sentence(r, vocab, Skewed(r, 50, 600), false);
        if (r.U() < 0.017) a += Pii(r);
        if (c) body += ",";
        AppendJsonString(&body, a);
      }
      body += "],\"choice\":" + std::to_string(r.Below(b));
    }
    ring_prompt[i % kRing] = prompt;
    ring_body[i % kRing] = body;
    if (r.U() < 0.33) ++thread;
    line = "{\"id\":\"r" + std::to_string(i) + "\",\"prompt\":";
    AppendJsonString(&line, prompt);
    line += ",\"candidates\":" + body;
    line += ",\"annotator\":\"a" + std::to_string(r.Below(200)) + "\",\"source\":\"s" + std::to_string(r.Below(6)) +
            "\",\"thread\":\"t" + std::to_string(thread) + "\"}\n";
    std::fwrite(line.data(), 1, line.size(), f);
  }
  std::fclose(f);
  std::printf("%s\n%s\n", path.c_str(), eval_path.c_str());
  return 0;
}
