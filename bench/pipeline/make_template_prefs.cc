// make_template_prefs: writes a synthetic help-desk preference dataset whose
// prompts, answers and evaluation items share stock text, for the pipeline
// benchmark (scripts/bench.sh, SHAPE=template) beside make_prefs' random text.
// Single-threaded, fixed seed: the same arguments give byte-identical files.
//
//   make_template_prefs N OUT_DIR [SEED] [EVAL]
//
// writes OUT_DIR/prefs-N.jsonl (layout: the "choice" preset plus /annotator,
// /source, /thread), OUT_DIR/eval-N.jsonl ({"qid","question"}; EVAL items,
// default 250) and OUT_DIR/truth-N.tsv (what was planted, one line each:
// id, kind, the evaluation item or the record copied; for scoring).
//
// Scenario (invented): the help desk of the Fernvale Water Cooperative.
// Customers write through a web form that wraps every message in the same
// header and consent footer; they open with one of a few greetings, ask with
// one of a dozen request templates (slots: account numbers, dates, streets),
// add a free-text description, and sign off with one of a few closings. Staff
// answers open and close with the cooperative's stock sentences and quote
// policy boilerplate around a free-text body. Evaluation items (questions
// kept for testing a model) are written the same way, so every training
// prompt shares template sentences with every evaluation item.
//
// Planted at fixed rates: 1% exact duplicate records, 2% near-duplicate
// prompts (an earlier prompt with 2-4 words inserted), 0.5% evaluation leaks
// (a third verbatim, a third with one word of the free text changed, a third
// embedded in a longer message with another greeting and closing), personal
// data in 1.7% of answers with safe fake values only (e-mail at example.com,
// IPv4 in 192.0.2.0/24 (RFC 5737), NANP 555-01xx phones (fiction range), the
// published test card 4111 1111 1111 1111). 200 annotators, 6 sources,
// threads of about 3 records.
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

template <size_t N>
const char* Pick(Rng& r, const char* const (&list)[N]) {
  return list[r.Below(N)];
}

// Stock text. Every list is small, so each entry is in many documents.
const char* const kGreetings[] = {
    "Hello Fernvale support team,",
    "Hi there, I hope you are well.",
    "Good morning, I am writing to the help desk.",
    "Dear Fernvale Water Cooperative customer service,",
    "Hello, I need some help with my account please.",
    "Good afternoon, I have a question for the support team.",
};
const char* const kCategories[] = {"billing", "meter reading", "water quality", "supply interruption",
                                   "payment plan", "moving home", "leak report", "new connection"};
const char* const kFormHeader =
    "Web form submission. Category: %s. Preferred contact: e-mail. Please describe your question below and "
    "include your account number if you have one.";
const char* const kFormFooter[] = {
    "I confirm that the details above are correct and I have read the privacy notice of the cooperative.",
    "I confirm that I am the account holder or have the account holder's permission to ask about this account.",
    "By sending this form I agree that the cooperative may contact me about this request.",
};
const char* const kSignoffs[] = {
    "Thanks in advance for your help. Kind regards.",
    "Many thanks, looking forward to hearing from you.",
    "Thank you for your time. Best wishes.",
    "I would appreciate a reply as soon as possible. Regards.",
    "Thanks a lot for sorting this out.",
};
// Request templates: %s slots are filled in order (account, date, street).
const char* const kRequests[] = {
    "My bill for account %s dated %s is much higher than usual and I would like to understand why.",
    "The meter at %s was last read on %s and I think the reading on my statement for account %s is wrong.",
    "Since %s the water at %s has looked cloudy when it first comes out of the tap.",
    "We had no water at %s on %s for most of the day and nobody told us in advance.",
    "Could I set up a payment plan for account %s because the amount due on %s is more than I can pay at once?",
    "I am moving out of %s on %s and need to close account %s and give a final meter reading.",
    "There is water pooling on the pavement outside %s and it has been there since %s.",
    "I would like to ask for a new connection at %s and want to know how long it takes after %s.",
    "Please explain the standing charge on account %s that first appeared on %s.",
    "The pressure at %s has been very low since %s, especially in the morning.",
    "I paid the bill for account %s on %s but the statement still shows it as unpaid.",
    "Can you tell me whether the works on the main at %s that started on %s will affect my supply?",
};
const char* const kStreets[] = {"Alder Row", "Beacon Lane", "Crescent Walk", "Dunmore Street", "Elm Terrace",
                                "Foundry Yard", "Gable Close", "Heron Quay", "Ivy Court", "Juniper Road",
                                "Kestrel Way", "Linden Mews", "Millrace Street", "Northgate", "Orchard Rise"};
const char* const kMonths[] = {"January", "February", "March", "April", "May", "June", "July", "August",
                               "September", "October", "November", "December"};
// Staff answers.
const char* const kOpeners[] = {
    "Thank you for contacting the Fernvale Water Cooperative help desk. I will be looking after your request today.",
    "Thank you for getting in touch with the cooperative, and sorry for the trouble this has caused.",
    "Thanks for your message to the Fernvale help desk. I have looked into your account and can explain what "
    "happened.",
    "Thank you for your patience while we looked into this for you.",
};
const char* const kPolicy[] = {
    "Please note that meters are read every ninety days and the bills in between are estimated from your usual use.",
    "If you are in difficulty with payments, our hardship team can spread the balance over up to twelve months.",
    "Standing charges cover the cost of maintaining the network and are the same for every household in the area.",
    "Planned works are announced on our website and by letter at least forty eight hours before the supply is "
    "turned off.",
    "Cloudy water is usually caused by tiny air bubbles and clears from the bottom of the glass within a few "
    "minutes.",
    "When you move home we need a final reading on the day you leave so that you only pay for what you used.",
    "Leaks on public land are repaired by the cooperative at no cost, while pipes inside the boundary are the "
    "owner's responsibility.",
    "A new connection normally takes between four and eight weeks once the survey has been completed.",
    "Payments made by bank transfer can take up to three working days to appear on your account.",
    "Low pressure in the morning is common when many households use water at the same time.",
    "You can submit your own meter reading online at any time and we will use it for your next bill.",
    "Our emergency line is open day and night for burst mains and loss of supply.",
};
const char* const kClosings[] = {
    "If you have any further questions, reply to this message and quote your case number. Our lines are open from "
    "eight until six on weekdays. Kind regards, the Fernvale Water Cooperative help desk.",
    "I hope this helps. If anything is still unclear, just reply to this message and a member of the team will get "
    "back to you within two working days. Best wishes, Fernvale customer service.",
    "Thank you again for contacting us. This message and any attachments are intended only for the named "
    "recipient and may contain information about your account. Fernvale Water Cooperative help desk.",
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
  std::stable_sort(v.begin(), v.end(), [](const std::string& a, const std::string& b) { return a.size() < b.size(); });
  return v;
}

// Zipf-like word choice: index = n * u^3 favours the head of the vocabulary.
const std::string& Word(Rng& r, const std::vector<std::string>& vocab) {
  double u = r.U();
  return vocab[static_cast<size_t>(u * u * u * vocab.size())];
}

// Free text: `words` words in sentences of about 12.
std::string FreeText(Rng& r, const std::vector<std::string>& vocab, size_t words) {
  std::string s;
  for (size_t i = 0; i < words; ++i) {
    if (i) s += (i % 12 == 11) ? ". " : " ";
    s += Word(r, vocab);
  }
  if (words) s += ".";
  return s;
}

size_t Skewed(Rng& r, size_t lo, size_t hi) {
  double u = r.U();
  return lo + static_cast<size_t>(u * u * (hi - lo));
}

std::string Account(Rng& r) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "FW-%06" PRIu64, r.Below(1000000));
  return buf;
}

std::string Date(Rng& r) {
  return std::to_string(1 + r.Below(28)) + " " + Pick(r, kMonths);
}

std::string Street(Rng& r) { return std::to_string(1 + r.Below(120)) + " " + Pick(r, kStreets); }

// One filled request template.
std::string Request(Rng& r) {
  const size_t t = r.Below(sizeof kRequests / sizeof *kRequests);
  const std::string tmpl = kRequests[t];
  std::string out;
  // Slot kinds by the words before each %s.
  size_t from = 0;
  for (;;) {
    size_t at = tmpl.find("%s", from);
    out.append(tmpl, from, at == std::string::npos ? std::string::npos : at - from);
    if (at == std::string::npos) break;
    const std::string before = tmpl.substr(0, at);
    auto ends = [&](const char* w) {
      const std::string x = w;
      return before.size() >= x.size() && before.compare(before.size() - x.size(), x.size(), x) == 0;
    };
    if (ends("account ")) out += Account(r);
    else if (ends(" on ") || ends("since ") || ends("dated ") || ends("after ")) out += Date(r);
    else out += Street(r);
    from = at + 2;
  }
  return out;
}

// A customer message: greeting, form header, request, description, footer, sign-off.
std::string CustomerMessage(Rng& r, const std::vector<std::string>& vocab, size_t lo, size_t hi) {
  char header[256];
  std::snprintf(header, sizeof header, kFormHeader, Pick(r, kCategories));
  std::string s = Pick(r, kGreetings);
  s += " ";
  s += header;
  s += " ";
  s += Request(r);
  s += " ";
  s += FreeText(r, vocab, Skewed(r, lo, hi));
  s += " ";
  s += Pick(r, kFormFooter);
  s += " ";
  s += Pick(r, kSignoffs);
  return s;
}

std::string StaffAnswer(Rng& r, const std::vector<std::string>& vocab) {
  std::string s = Pick(r, kOpeners);
  const size_t words = Skewed(r, 20, 250);
  // Free text with one to three policy sentences placed inside it.
  const int policies = 1 + static_cast<int>(r.Below(3));
  size_t done = 0;
  for (int p = 0; p < policies; ++p) {
    size_t chunk = (words - done) / static_cast<size_t>(policies - p);
    s += " ";
    s += FreeText(r, vocab, chunk);
    s += " ";
    s += Pick(r, kPolicy);
    done += chunk;
  }
  s += " ";
  s += Pick(r, kClosings);
  return s;
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

// Changes one word of the free text of an evaluation item (a word of at
// least four letters after the request, so the stock text stays intact).
std::string ChangeOneWord(Rng& r, const std::string& text, const std::vector<std::string>& vocab) {
  std::vector<size_t> starts;
  const size_t desc = text.find("below and include your account number if you have one.");
  for (size_t i = desc == std::string::npos ? 0 : desc + 60; i + 4 < text.size(); ++i) {
    if (text[i] == ' ' && text[i + 1] >= 'a' && text[i + 1] <= 'z') starts.push_back(i + 1);
  }
  if (starts.empty()) return text + " " + Word(r, vocab);
  const size_t at = starts[starts.size() / 2 + r.Below(std::max<size_t>(1, starts.size() / 4))];
  size_t end = at;
  while (end < text.size() && text[end] >= 'a' && text[end] <= 'z') ++end;
  std::string w;
  do w = Word(r, vocab); while (w == text.substr(at, end - at));
  return text.substr(0, at) + w + text.substr(end);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 3) {
    std::fprintf(stderr, "usage: make_template_prefs N OUT_DIR [SEED] [EVAL]\n");
    return 2;
  }
  const uint64_t n = std::strtoull(argv[1], nullptr, 10);
  const std::string dir = argv[2];
  Rng r{argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 20261203ull};
  const uint64_t n_eval = argc > 4 ? std::strtoull(argv[4], nullptr, 10) : 250;
  if (n_eval == 0) {
    std::fprintf(stderr, "make_template_prefs: EVAL must be at least 1\n");
    return 2;
  }
  std::vector<std::string> vocab = MakeVocab(r, 20000);

  std::vector<std::string> eval;
  const std::string eval_path = dir + "/eval-" + std::to_string(n) + ".jsonl";
  std::FILE* ef = std::fopen(eval_path.c_str(), "wb");
  if (!ef) { std::perror(eval_path.c_str()); return 1; }
  std::string line;
  for (uint64_t i = 0; i < n_eval; ++i) {
    eval.push_back(CustomerMessage(r, vocab, 15, 60));
    line = "{\"qid\":\"q" + std::to_string(i) + "\",\"question\":";
    AppendJsonString(&line, eval.back());
    line += "}\n";
    std::fwrite(line.data(), 1, line.size(), ef);
  }
  std::fclose(ef);

  const std::string path = dir + "/prefs-" + std::to_string(n) + ".jsonl";
  const std::string truth_path = dir + "/truth-" + std::to_string(n) + ".tsv";
  std::FILE* f = std::fopen(path.c_str(), "wb");
  std::FILE* tf = std::fopen(truth_path.c_str(), "wb");
  if (!f || !tf) { std::perror(path.c_str()); return 1; }
  std::fprintf(tf, "id\tkind\tof\n");
  constexpr size_t kRing = 4096;
  std::vector<std::string> ring_prompt(kRing), ring_body(kRing), ring_id(kRing);
  uint64_t thread = 0;
  for (uint64_t i = 0; i < n; ++i) {
    const std::string id = "r" + std::to_string(i);
    const double u = r.U();
    std::string prompt, body;
    if (i > 100 && u < 0.01) {  // exact duplicate of a recent record
      size_t k = (i - 1 - r.Below(std::min<uint64_t>(i - 1, kRing - 1))) % kRing;
      prompt = ring_prompt[k];
      body = ring_body[k];
      std::fprintf(tf, "%s\texact_duplicate\t%s\n", id.c_str(), ring_id[k].c_str());
    } else {
      if (i > 100 && u < 0.03) {  // near-duplicate prompt: a few words inserted
        size_t k = (i - 1 - r.Below(std::min<uint64_t>(i - 1, kRing - 1))) % kRing;
        prompt = ring_prompt[k];
        for (int c = 2 + static_cast<int>(r.Below(3)); c > 0; --c) {
          size_t at = prompt.find(' ', r.Below(prompt.size()));
          if (at != std::string::npos) prompt.insert(at, " " + Word(r, vocab));
        }
        std::fprintf(tf, "%s\tnear_duplicate\t%s\n", id.c_str(), ring_id[k].c_str());
      } else if (u < 0.035) {  // an evaluation leak
        const uint64_t q = r.Below(eval.size());
        const double v = r.U();
        const char* kind;
        if (v < 1.0 / 3) {
          prompt = eval[q];
          kind = "leak_verbatim";
        } else if (v < 2.0 / 3) {
          prompt = ChangeOneWord(r, eval[q], vocab);
          kind = "leak_one_word";
        } else {
          prompt = std::string(Pick(r, kGreetings)) + " I sent this before and had no answer, so here it is again: " +
                   eval[q] + " " + FreeText(r, vocab, 10 + r.Below(30)) + " " + Pick(r, kSignoffs);
          kind = "leak_embedded";
        }
        std::fprintf(tf, "%s\t%s\tq%" PRIu64 "\n", id.c_str(), kind, q);
      } else {
        prompt = CustomerMessage(r, vocab, 10, 160);
      }
      const size_t b = 2 + r.Below(3);
      body = "[";
      for (size_t c = 0; c < b; ++c) {
        std::string a = StaffAnswer(r, vocab);
        if (r.U() < 0.017) a += Pii(r);
        if (c) body += ",";
        AppendJsonString(&body, a);
      }
      body += "],\"choice\":" + std::to_string(r.Below(b));
    }
    ring_prompt[i % kRing] = prompt;
    ring_body[i % kRing] = body;
    ring_id[i % kRing] = id;
    if (r.U() < 0.33) ++thread;
    line = "{\"id\":\"" + id + "\",\"prompt\":";
    AppendJsonString(&line, prompt);
    line += ",\"candidates\":" + body;
    line += ",\"annotator\":\"a" + std::to_string(r.Below(200)) + "\",\"source\":\"s" + std::to_string(r.Below(6)) +
            "\",\"thread\":\"t" + std::to_string(thread) + "\"}\n";
    std::fwrite(line.data(), 1, line.size(), f);
  }
  std::fclose(f);
  std::fclose(tf);
  std::printf("%s\n%s\n%s\n", path.c_str(), eval_path.c_str(), truth_path.c_str());
  return 0;
}
