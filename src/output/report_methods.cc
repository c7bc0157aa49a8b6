// The methods with their published sources, and the cautions every reader
// of regional price levels should see.
#include <string>

#include "output/report_parts.h"
#include "paritas/survey/config.h"

namespace paritas::internal::report {

std::string MethodsSection(const Context& ctx) {
  std::string out = OpenSection("methods", "Methods and sources");
  const RunConfig* c = ctx.in.config;
  const ElementaryMethod elementary = c != nullptr ? c->elementary : ElementaryMethod::kCpd;
  const AggregationMethod aggregation = c != nullptr ? c->aggregation : AggregationMethod::kGeksFisher;
  out += "<dl class=\"methods\">";
  out += "<dt>Cell prices</dt><dd>The quotes of one item in one region are averaged geometrically into a cell price; "
         "the geometric mean is the common practice for elementary price indices (ILO et al., <i>Consumer Price "
         "Index Manual</i>, 2004, ch. 20).</dd>";
  switch (elementary) {
    case ElementaryMethod::kCpd:
      out += "<dt>Basic headings: Country-Product-Dummy (in use)</dt><dd>ln price = region effect + item effect + "
             "error, fitted by least squares; the region effects are the heading's parities and their standard errors "
             "follow from the regression. Summers, R. (1973), \xE2\x80\x9CInternational price comparisons based upon "
             "incomplete data\xE2\x80\x9D, <i>Review of Income and Wealth</i> 19(1).</dd>";
      break;
    case ElementaryMethod::kRobustCpd:
      out += "<dt>Basic headings: robust Country-Product-Dummy (in use)</dt><dd>The CPD model of Summers (1973, "
             "<i>Review of Income and Wealth</i> 19(1)) fitted with Huber's loss, so single wrong prices weigh "
             "less: Huber, P. J. (1964), \xE2\x80\x9CRobust estimation of a location parameter\xE2\x80\x9D, <i>Annals "
             "of Mathematical Statistics</i> 35(1).</dd>";
      break;
    case ElementaryMethod::kJevonsGeks:
      out += "<dt>Basic headings: GEKS over Jevons indices (in use)</dt><dd>Bilateral Jevons indices (geometric "
             "means of price relatives over the items both regions priced; Jevons, W. S., 1865) made transitive by "
             "GEKS (below).</dd>";
      break;
  }
  out += std::string("<dt>Aggregates: GEKS over ") +
         (aggregation == AggregationMethod::kGeksFisher ? "Fisher" : "T\xC3\xB6rnqvist") +
         " indices (in use)</dt><dd>Heading parities are combined with each region's expenditure weights into "
         "bilateral indices for every pair of regions, then made transitive: the GEKS parity of a region is the "
         "geometric mean of its bilateral comparisons through every other region, the transitive set closest to "
         "the bilaterals in least squares of logs. Gini, C. (1931), <i>Metron</i> 9; \xC3\x89ltet\xC5\x91, \xC3\x96. "
         "and K\xC3\xB6ves, P. (1964), <i>Statisztikai Szemle</i> 42; Szulc, B. (1964), <i>Przegl\xC4\x85" "d "
         "Statystyczny</i> 11.</dd>";
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
