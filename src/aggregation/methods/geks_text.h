// The report's description of GEKS, shared by the geks-* methods.
#ifndef PARITAS_INTERNAL_AGGREGATION_METHODS_GEKS_TEXT_H_
#define PARITAS_INTERNAL_AGGREGATION_METHODS_GEKS_TEXT_H_

namespace paritas::internal {

inline constexpr const char* kGeksReportHtml =
    "Heading parities are combined with each region's expenditure weights into bilateral indices for every "
    "pair of regions, then made transitive: the GEKS parity of a region is the geometric mean of its "
    "bilateral comparisons through every other region, the transitive set closest to the bilaterals in "
    "least squares of logs. Gini, C. (1931), \xE2\x80\x9COn the circular test of index "
    "numbers\xE2\x80\x9D, <i>Metron</i> 9; \xC3\x89ltet\xC5\x91, \xC3\x96. and K\xC3\xB6ves, P. "
    "(1964), \xE2\x80\x9COn a problem of index number computation relating to international "
    "comparison\xE2\x80\x9D, <i>Statisztikai Szemle</i> 42; Szulc, B. (1964), \xE2\x80\x9CIndices "
    "for multiregional comparisons\xE2\x80\x9D, <i>Przegl\xC4\x85"
    "d Statystyczny</i>.";

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_AGGREGATION_METHODS_GEKS_TEXT_H_
