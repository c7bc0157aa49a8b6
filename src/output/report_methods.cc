// The methods with their published sources, and the cautions every reader
// of regional price levels should see.
#include <string>

#include "output/report_parts.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/elementary/elementary_method.h"
#include "paritas/survey/config.h"

namespace paritas::internal::report {

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
