// The report's descriptions of the additive methods, with the Gerschenkron
// caution they share.
#ifndef PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_TEXT_H_
#define PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_TEXT_H_

namespace paritas::internal {

#define PARITAS_GERSCHENKRON_CAUTION                                                              \
  " Real expenditure at international prices adds up over the headings (written by heading to "   \
  "real_by_heading.csv). The caution that goes with additivity: valuing every region's "          \
  "quantities at one set of prices pulls volumes toward the price structure behind those prices " \
  "(the Gerschenkron effect; Gerschenkron 1951, RAND R-197): a region whose price structure "     \
  "differs from it buys more of what is cheap there, so its real expenditure comes out higher, "  \
  "and its parity lower, than a GEKS comparison gives."

inline constexpr const char* kGearyKhamisReportHtml =
    "Parities and international prices are solved together: the international price of a heading "
    "is the quantity-weighted mean of its deflated parities, "
    "&pi;<sub>h</sub> = &Sigma;<sub>r</sub> q<sub>rh</sub> p<sub>rh</sub>/PPP<sub>r</sub> / "
    "&Sigma;<sub>r</sub> q<sub>rh</sub>, with quantity q<sub>rh</sub> = expenditure / heading "
    "parity, and a region's parity is its expenditure over its quantities at international prices, "
    "PPP<sub>r</sub> = &Sigma;<sub>h</sub> p<sub>rh</sub> q<sub>rh</sub> / &Sigma;<sub>h</sub> "
    "&pi;<sub>h</sub> q<sub>rh</sub>. Quantities weigh regions by their size, so the international "
    "prices are those of the big regions. Geary, R. C. (1958), <i>JRSS A</i> 121; Khamis, S. H. "
    "(1972), <i>JRSS A</i> 135." PARITAS_GERSCHENKRON_CAUTION;

inline constexpr const char* kIkleDikhanovBalkReportHtml =
    "Additive like Geary&ndash;Khamis, with international prices that weigh each region by its "
    "expenditure shares rather than its size: 1/&pi;<sub>h</sub> = &Sigma;<sub>r</sub> "
    "s<sub>rh</sub> (PPP<sub>r</sub>/p<sub>rh</sub>) / &Sigma;<sub>r</sub> s<sub>rh</sub>, a "
    "share-weighted harmonic mean of the deflated heading parities, and PPP<sub>r</sub> = "
    "&Sigma;<sub>h</sub> p<sub>rh</sub> q<sub>rh</sub> / &Sigma;<sub>h</sub> &pi;<sub>h</sub> "
    "q<sub>rh</sub>; the pull toward the big regions is smaller. Ikl&eacute;, D. M. (1972), "
    "<i>Quarterly Journal of Economics</i> 86; Dikhanov, Y. (1994), World Bank; Balk, B. M. "
    "(1996), <i>Journal of Official Statistics</i> 12." PARITAS_GERSCHENKRON_CAUTION;

#undef PARITAS_GERSCHENKRON_CAUTION

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_TEXT_H_
