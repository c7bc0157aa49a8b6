// The methods with their published sources, and the cautions every reader
// of regional price levels should see.
#include <cmath>
#include <string>

#include "output/report_parts.h"
#include "paritas/base/text.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/compute/compute.h"
#include "paritas/elementary/elementary_method.h"
#include "paritas/survey/config.h"

namespace paritas::internal::report {

// cprd: the representativity effect of every heading, as a premium in %.
std::string RepresentativityTable(const Context& ctx) {
  std::string rows;
  for (const HeadingParities& h : ctx.result.headings) {
    if (h.num_cells == 0 || !h.identified) continue;
    const bool has = std::isfinite(h.representativity_effect);
    rows += "<tr><td>" + HtmlEscape(ctx.survey.heading_codes[h.heading]) + "</td><td class=\"num\">" +
            (has ? Num(100.0 * std::expm1(h.representativity_effect), 1) : "\xE2\x80\x94") +
            "</td><td class=\"num\">" +
            (std::isfinite(h.representativity_se) ? Num(100.0 * h.representativity_se, 1)
                                                  : "\xE2\x80\x94") +
            "</td><td class=\"num\">" + FormatCount(h.num_cells_representative) + " of " +
            FormatCount(h.num_cells) + "</td></tr>";
  }
  if (rows.empty()) return "";
  return "<dd>Representativity effect by heading: how much dearer (+) or cheaper (\xE2\x88\x92) an item "
         "flagged representative is than an unflagged one in the same region, in %; \xE2\x80\x94 where "
         "the flags do not identify it (none, or the same for every region of each item). Also in "
         "<code>representativity.csv</code>.<div class=\"table-scroll tall\"><table class=\"data\">"
         "<thead><tr><th>Heading</th><th>Effect, %</th><th>Standard error, log points \xC3\x97 100"
         "</th><th>Cells flagged</th></tr></thead><tbody>" +
         rows + "</tbody></table></div></dd>";
}

// The missing_parities rules and what they did: one row per heading with a
// rule other than leave, or with regions imputed or left without a parity.
std::string MissingParitiesPart(const Context& ctx) {
  const ParityResult& result = ctx.result;
  const int num_headings = ctx.survey.num_headings();
  if (result.heading_rules.size() != static_cast<size_t>(num_headings)) return "";
  auto regions = [&](const std::vector<int>& list) {
    std::string text;
    for (size_t k = 0; k < list.size() && k < 10; ++k) text += (k > 0 ? ", " : "") + ctx.Code(list[k]);
    if (list.size() > 10) text += ", ... (" + std::to_string(list.size()) + ")";
    return HtmlEscape(text);
  };
  std::string rows;
  for (int h = 0; h < num_headings; ++h) {
    const HeadingRule& rule = result.heading_rules[h];
    const std::vector<int>& imputed = result.imputed_regions[h];
    const std::vector<int>& missing = result.missing_regions[h];
    if (rule.rule == ImputationRule::kLeave && imputed.empty() && missing.empty()) continue;
    rows += "<tr><td>" + HtmlEscape(ctx.survey.heading_codes[h]) + "</td><td>" + HtmlEscape(rule.ToString()) +
            "</td><td>" + regions(imputed) + "</td><td>" + regions(missing) + "</td></tr>";
  }
  std::string out =
      "<dt>Missing heading parities</dt><dd>A region that spends on a basic heading without a parity there gets "
      "one by the heading's rule (<code>missing_parities</code>): <i>leave</i> (the heading drops out of its "
      "comparisons pair by pair), <i>parent</i> (its parity of the parent aggregate without the heading), "
      "<i>like:&lt;heading&gt;</i> (its parity of a related heading) or <i>external</i> (the external parities "
      "file), each linked to the heading's scale over the regions priced in it; the reference parities of "
      "international comparisons for basic headings without prices follow the same idea. The <code>source</code> "
      "and <code>share_*</code> columns of parities.csv say how much of each aggregate rests on imputed "
      "parities.";
  if (rows.empty()) return out + " Every region that spends on a heading has a parity of its own.</dd>";
  return out + "<div class=\"table-scroll\"><table class=\"data\"><thead><tr><th>heading</th><th>rule</th>"
               "<th>regions imputed</th><th>regions still without a parity</th></tr></thead><tbody>" +
         rows + "</tbody></table></div></dd>";
}

std::string MethodsSection(const Context& ctx) {
  std::string out = OpenSection("methods", "Methods and sources");
  const RunConfig* c = ctx.in.config;
  const ElementaryMethod* elementary = FindElementaryMethod(c != nullptr ? c->elementary : "cpd");
  const AggregationMethod* aggregation = FindAggregationMethod(c != nullptr ? c->aggregation : "geks-fisher");
  out += "<dl class=\"methods\">";
  if (!ctx.in.extrapolation_caution.empty()) {
    out += "<dt>Carried to a later period (in use)</dt><dd>The basic heading parities are the "
           "benchmark run's, each moved by its region's price index relative to the country's "
           "(<code>carried_headings.csv</code>), and aggregated below with the benchmark's "
           "methods; the cell prices and the elementary method describe the benchmark, whose own "
           "report shows its quotes.</dd>";
  }
  out += "<dt>Cell prices</dt><dd>The quotes of one item in one region are averaged geometrically into a cell price; "
         "the geometric mean is the common practice for elementary price indices (ILO et al., <i>Consumer Price "
         "Index Manual</i>, 2004, ch. 20).</dd>";
  if (elementary != nullptr) {
    out += "<dt>Basic headings: " + std::string(elementary->ReportTitle()) + " (in use)</dt><dd>" +
           std::string(elementary->ReportHtml()) + "</dd>";
    if (elementary->Properties().gives_representativity_effect) out += RepresentativityTable(ctx);
  }
  if (aggregation != nullptr) {
    out += "<dt>Aggregates: " + std::string(aggregation->ReportTitle()) + " (in use)</dt><dd>" +
           std::string(aggregation->ReportHtml()) + "</dd>";
  }
  out += "<dt>Index formulas</dt><dd>Laspeyres (basket of the base region), Paasche (basket of the other), Fisher "
         "(their geometric mean; Fisher, I., 1922, <i>The Making of Index Numbers</i>) and T\xC3\xB6rnqvist "
         "(T\xC3\xB6rnqvist, L., 1936, \xE2\x80\x9CThe Bank of Finland\xE2\x80\x99s consumption price "
         "index\xE2\x80\x9D, <i>Bank of Finland Monthly Bulletin</i> 10), as in the <i>Consumer Price Index "
         "Manual</i> (ILO et al., 2004, ch. 15\xE2\x80\x93" "17).</dd>";
  out += "<dt>Regional comparisons</dt><dd>The same methods serve international comparisons: Eurostat and OECD, "
         "<i>Methodological Manual on Purchasing Power Parities</i> (2012); World Bank, <i>Measuring the Real Size "
         "of the World Economy</i> (2013).</dd>";
  out += "<dt>Reference</dt><dd>Every node is normalised on its own: " + HtmlEscape(ctx.root.reference_used) +
         " = 100. Real expenditure is nominal expenditure divided by the parity / 100.</dd>";
  out += MissingParitiesPart(ctx);
  out += "</dl>\n";
  return out + "</section>\n";
}

std::string CautionsSection() {
  std::string out = OpenSection("cautions", "Cautions");
  out += "<ul class=\"cautions\">"
         "<li><b>Sampling error.</b> Parities are estimates from a sample of items, outlets and quotes; small "
         "differences between regions may be noise. Standard errors of the heading parities are in "
         "<code>parities.csv</code>.</li>"
         "<li><b>Item comparability.</b> A parity compares like with like only as far as the items priced are "
         "the same quality in every region; differences in package size, brand or outlet type show up as price "
         "differences.</li>"
         "<li><b>Formula choice.</b> Different index formulas give different answers where regions buy "
         "differently (see the Paasche\xE2\x80\x93Laspeyres spread); no single formula is right for every use.</li>"
         "<li><b>Official figures.</b> This report describes one computation; official regional price levels come "
         "from the statistical authority.</li></ul>\n";
  return out + "</section>\n";
}

}  // namespace paritas::internal::report
