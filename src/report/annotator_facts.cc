#include "report/annotator_facts.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdio>

#include "report/html_escape.h"
#include "report/json_find.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

std::string Str(const Json* j) {
  if (!j || j->is_null()) return "n/a";
  return j->is_string() ? j->get<std::string>() : j->dump();
}

std::string Fixed(const Json* j, int digits = 3) {
  if (!j || !j->is_number()) return "n/a";
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", digits, j->get<double>());
  return buf;
}

std::string AlphaText(const Json& fig) {
  const Json* iv = FindPath(fig, {"interval"});
  std::string s = Fixed(FindPath(fig, {"alpha"}));
  if (iv && iv->is_array() && iv->size() == 2) s += " [" + Fixed(&(*iv)[0]) + ", " + Fixed(&(*iv)[1]) + "]";
  return s;
}

}  // namespace

Json CollectionFacts(const Json& s) {
  Json f = Json::array();
  auto add = [&](const std::string& what, const Json& value) { f.push_back(Json{{"fact", what}, {"value", value}}); };
  const Json* a = FindPath(s, {"stages", "annotators"});
  if (!a) {
    add("annotator agreement", "not measured: the annotators stage did not run");
    return f;
  }
  const Json& ag = (*a)["agreement"];
  const Json* bs = FindPath(ag, {"bootstrap", "confidence"});
  add("annotator agreement beyond chance: Krippendorff's alpha (nominal) [" +
          (bs && bs->is_number() ? std::to_string(static_cast<int>(std::lround(bs->get<double>() * 100))) : std::string("95")) +
          "% bootstrap interval]",
      AlphaText(ag) + " over " + Str(FindPath(ag, {"comparisons_judged_twice_or_more"})) +
          " comparisons judged by two or more annotators");
  add("raw pairwise agreement over those comparisons", Fixed(FindPath(ag, {"pairwise_agreement_rate"})));
  const Json* an = FindPath(*a, {"annotators"});
  if (an) {
    add("annotators (distinct / tested against the others)",
        Str(FindPath(*an, {"distinct"})) + " / " + Str(FindPath(*an, {"tested"})));
    add("annotators who are candidates for review (share of judgments)",
        Str(FindPath(*an, {"candidates_for_review"})) + " (" + Fixed(FindPath(*an, {"flagged_judgment_share"})) + "); policy " +
            Str(FindPath(*an, {"policy"})));
  }
  add("prompts with a preference cycle among their candidates", Str(FindPath(*a, {"cycles", "prompts_with_cycle"})));
  add("rushed judgments (much faster than the annotator's or the set's median gap)",
      Str(FindPath(*a, {"speed", "rushed"})) + " of " + Str(FindPath(*a, {"speed", "records_with_time"})) +
          " records with a time");
  return f;
}

std::string AnnotatorsSection(const Json& s) {
  const Json* a = FindPath(s, {"stages", "annotators"});
  if (!a) return "";
  std::string o = "<h2 id=\"annotators\">Annotators</h2>\n";
  const Json& ag = (*a)["agreement"];
  o += "<dl class=\"facts\"><dt>Krippendorff's alpha (nominal)</dt><dd>" + Esc(AlphaText(ag)) +
       " <span class=\"small\">(bootstrap interval over comparisons)</span></dd><dt>comparisons judged by two or more "
       "annotators</dt><dd>" + Esc(Str(FindPath(ag, {"comparisons_judged_twice_or_more"}))) +
       "</dd><dt>raw pairwise agreement</dt><dd>" + Esc(Fixed(FindPath(ag, {"pairwise_agreement_rate"}))) + "</dd>";
  if (const Json* fk = FindPath(ag, {"fleiss_kappa"}); fk && fk->is_number()) {
    o += "<dt>Fleiss' kappa</dt><dd>" + Esc(Fixed(fk)) + "</dd>";
  }
  o += "</dl>\n";
  if (const Json* bs = FindPath(ag, {"by_source"}); bs && bs->is_array() && !bs->empty()) {
    o += "<table><thead><tr><th>source</th><th>comparisons</th><th>alpha [interval]</th></tr></thead><tbody>";
    for (const auto& e : *bs) {
      o += "<tr><td>" + Esc(Str(FindPath(e, {"source"}))) + "</td><td>" + Esc(Str(FindPath(e, {"comparisons"}))) +
           "</td><td>" + Esc(AlphaText(e)) + "</td></tr>";
    }
    o += "</tbody></table>\n";
  }
  const Json* an = FindPath(*a, {"annotators"});
  const Json* table = an ? FindPath(*an, {"table"}) : nullptr;
  o += "<h3>Each annotator against the others</h3>";
  o += "<p class=\"small\">Agreement with the majority of the other annotators on shared comparisons, tested against "
       "the rest of the set (binomial, " + Esc(Str(an ? FindPath(*an, {"correction"}) : nullptr)) +
       "). Annotators listed as candidates for review disagree significantly more than the rest; they are candidates "
       "for review, not a verdict on anyone.</p>";
  if (table && table->is_array() && !table->empty()) {
    o += "<table><thead><tr><th>annotator</th><th>judgments</th><th>shared</th><th>agreement</th><th>rest of the set</th>"
         "<th>adjusted p</th><th>status</th></tr></thead><tbody>";
    for (int pass = 0; pass < 2; ++pass) {  // candidates for review first
      for (const auto& r : *table) {
        const bool flagged = Str(FindPath(r, {"status"})) == "candidate for review";
        if (flagged != (pass == 0)) continue;
        o += std::string("<tr") + (flagged ? " class=\"review\"" : "") + "><td>" + Esc(Str(FindPath(r, {"annotator"}))) +
             "</td><td>" + Esc(Str(FindPath(r, {"judgments"}))) + "</td><td>" + Esc(Str(FindPath(r, {"shared_comparisons"}))) +
             "</td><td>" + Esc(Fixed(FindPath(r, {"rate"}))) + "</td><td>" + Esc(Fixed(FindPath(r, {"rate_of_the_rest"}))) +
             "</td><td>" + Esc(Str(FindPath(r, {"p_adjusted"}))) + "</td><td>" + (flagged ? "<strong>" : "") +
             Esc(Str(FindPath(r, {"status"}))) + (flagged ? "</strong>" : "") + "</td></tr>";
      }
    }
    o += "</tbody></table>\n";
  } else {
    o += "<p class=\"missing\">no annotator field in the layout</p>\n";
  }
  o += "<h3>Preference cycles</h3><p>" + Esc(Str(FindPath(*a, {"cycles", "prompts_with_cycle"}))) + " of " +
       Esc(Str(FindPath(*a, {"cycles", "prompts_with_several_judgments"}))) +
       " prompts with several judgments have a cycle (A over B, B over C, C over A by majority).</p>";
  if (const Json* l = FindPath(*a, {"cycles", "listed"}); l && l->is_array() && !l->empty()) {
    o += "<table><thead><tr><th>prompt of</th><th>candidates</th><th>judgments</th><th>annotators</th></tr></thead><tbody>";
    size_t n = 0;
    for (const auto& c : *l) {
      if (++n > 20) break;
      std::string ids, anns;
      for (const auto& x : c["judgments"]) ids += (ids.empty() ? "" : ", ") + Str(&x);
      for (const auto& x : c["annotators"]) anns += (anns.empty() ? "" : ", ") + Str(&x);
      o += "<tr><td>" + Esc(Str(FindPath(c, {"prompt_of"}))) + "</td><td>" + Esc(Str(FindPath(c, {"candidates_in_cycle"}))) +
           "</td><td>" + Esc(ids) + "</td><td>" + Esc(anns) + "</td></tr>";
    }
    o += "</tbody></table>\n";
  }
  o += "<h3>Rushed judgments</h3><p>" + Esc(Str(FindPath(*a, {"speed", "rushed"}))) + " of " +
       Esc(Str(FindPath(*a, {"speed", "records_with_time"}))) +
       " records with a time came much sooner after the annotator's previous judgment than usual (below " +
       Esc(Str(FindPath(*a, {"speed", "fraction"}))) +
       " of the annotator's own or the set's median gap; a common sign of rushed labelling).</p>\n";
  o += "<p class=\"small\">Every finding: annotator_findings.jsonl; method: docs/annotators.md.</p>\n";
  return o;
}

}  // namespace prefsift
