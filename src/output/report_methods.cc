// The methods with their published sources, and the cautions every reader
// of regional price levels should see.
#include <cmath>
#include <string>

#include "output/report_parts.h"
#include "paritas/base/text.h"
#include "paritas/aggregation/aggregation_method.h"
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

std::string MethodsSection(const Context& ctx) {
  std::string out = OpenSection("methods", "Methods and sources");
  const RunConfig* c = ctx.in.config;
  const ElementaryMethod* elementary = FindElementaryMethod(c != nullptr ? c->elementary : "cpd");
  const AggregationMethod* aggregation = FindAggregationMethod(c != nullptr ? c->aggregation : "geks-fisher");
  out += "<dl class=\"methods\">";
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
         "(T\xC3\xB6rnqvist, L., 1936, <i>Bank of Finland Monthly Bulletin</i> 10), as in the <i>Consumer Price Index "
         "Manual</i> (ILO et al., 2004, ch. 15\xE2\x80\x93" "17).</dd>";
  out += "<dt>Regional comparisons</dt><dd>The same methods serve international comparisons: Eurostat and OECD, "
         "<i>Methodological Manual on Purchasing Power Parities</i> (2012); World Bank, <i>Measuring the Real Size "
         "of the World Economy</i> (2013).</dd>";
  out += "<dt>Reference</dt><dd>Every node is normalised on its own: " + HtmlEscape(ctx.root.reference_used) +
         " = 100. Real expenditure is nominal expenditure divided by the parity / 100.</dd>";
  out += "</dl>\n<p class=\"note\">Sources cited from memory of the published works.</p>\n";
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
