// The sections that say how far to trust the parities: the spread of the
// bilateral comparisons, the flagged outliers and the sensitivity run.
#include <algorithm>
#include <cmath>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {

namespace {

// A pair of regions (a < b) and its spread |ln(Laspeyres / Paasche)|.
struct SpreadPair {
  int a, b;
  double spread;
};

// The pairs whose spread is finite, in row order.
std::vector<SpreadPair> SpreadPairs(const BilateralMatrices& b) {
  const int n = static_cast<int>(b.laspeyres.rows());
  std::vector<SpreadPair> pairs;
  for (int i = 0; i < n; ++i) {
    for (int j = i + 1; j < n; ++j) {
      const double s = std::abs(std::log(b.laspeyres(i, j) / b.paasche(i, j)));
      if (std::isfinite(s)) pairs.push_back({i, j, s});
    }
  }
  return pairs;
}

// The k-th smallest of `values` (0-based), by partial selection: the
// vector is reordered, not sorted (a full sort of millions of pairs costs
// a second at 3,000 regions).
double KthSmallest(std::vector<double>* values, size_t k) {
  std::nth_element(values->begin(), values->begin() + k, values->end());
  return (*values)[k];
}

// Summary cards of the spreads (`values` in percent, not empty; reordered):
// the median (mean of the two middle values of an even count), the 90th
// percentile (the value at rank floor(0.9 (n - 1)) ascending) and the largest.
std::string SpreadCards(std::vector<double>* values, double largest) {
  const size_t n = values->size();
  double median = KthSmallest(values, n / 2);
  if (n % 2 == 0) {
    const double below = *std::max_element(values->begin(), values->begin() + n / 2);
    median = 0.5 * (below + median);
  }
  const double p90 = KthSmallest(values, static_cast<size_t>(0.9 * (n - 1)));
  return "<div class=\"cards\">" +
         Card(FormatCount(static_cast<int64_t>(n)), "pairs of regions") +
         Card(Num(median, 2) + "\xC2\xA0%", "median spread") +
         Card(Num(p90, 2) + "\xC2\xA0%", "90th percentile") +
         Card(Num(largest, 2) + "\xC2\xA0%", "largest spread") + "</div>\n";
}

// Bins of the spread histogram: a round width (1, 2 or 5 times a power of
// ten) starting at 0, so every bar edge is a round number and the axis
// labels can sit on edges rather than somewhere inside a bar.
struct HistogramBins {
  double width = 1.0;
  int count = 1;
  // Bars between two labelled edges.
  int label_every = 1;
};

HistogramBins MakeHistogramBins(double largest) {
  constexpr int kTargetBins = 24, kMaxLabels = 8;
  HistogramBins bins;
  const double raw = std::max(largest, 1e-6) / kTargetBins;
  const double magnitude = std::pow(10.0, std::floor(std::log10(raw)));
  for (double m : {1.0, 2.0, 5.0, 10.0}) {
    bins.width = m * magnitude;
    if (bins.width >= raw * (1 - 1e-9)) break;
  }
  // The largest value falls in the last bin, [width (count - 1), width count).
  bins.count = static_cast<int>(std::floor(largest / bins.width)) + 1;
  for (int k : {1, 2, 5, 10, 20, 50}) {
    bins.label_every = k;
    if (bins.count / k <= kMaxLabels) break;
  }
  return bins;
}

// Histogram of the spreads (`values` in percent, `largest` their maximum).
std::string SpreadHistogram(const std::vector<double>& values, double largest) {
  const HistogramBins bins = MakeHistogramBins(largest);
  const int num_bins = bins.count;
  std::vector<int> counts(num_bins, 0);
  for (double v : values) {
    ++counts[std::clamp(static_cast<int>(std::floor(v / bins.width)), 0, num_bins - 1)];
  }
  const int max_count = *std::max_element(counts.begin(), counts.end());
  const double left = 60.0, right = 20.0, plot_top = 20.0, plot_h = 180.0;
  const double height = plot_top + plot_h + 44.0;
  const double bar_w = (kChartWidth - left - right) / num_bins;
  std::string out = "<svg class=\"chart\" id=\"spread-histogram\" viewBox=\"0 0 " + C(kChartWidth) +
                    " " + C(height) +
                    "\" role=\"img\" aria-label=\"histogram of Paasche-Laspeyres spreads\">";
  for (double t : NiceTicks(0, max_count, 4)) {
    if (t != std::floor(t)) continue;  // counts are whole
    const double y = plot_top + plot_h - t / max_count * plot_h;
    out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) +
           "\" y1=\"" + C(y) + "\" y2=\"" + C(y) + "\"/><text class=\"tick\" x=\"" + C(left - 6) +
           "\" y=\"" + C(y + 4) + "\" text-anchor=\"end\">" + FormatCount(std::llround(t)) +
           "</text>";
  }
  for (int i = 0; i < num_bins; ++i) {
    const double h = static_cast<double>(counts[i]) / max_count * plot_h;
    const double lo = bins.width * i, hi = bins.width * (i + 1);
    out += "<rect class=\"hist-bar\" x=\"" + C(left + bar_w * i + 1) + "\" y=\"" +
           C(plot_top + plot_h - h) + "\" width=\"" + C(bar_w - 2) + "\" height=\"" + C(h) +
           "\"><title>" + Num(lo, 2) + "\xE2\x80\x93" + Num(hi, 2) +
           " %: " + FormatCount(counts[i]) + " pairs</title></rect>";
    if (counts[i] > 0) {
      out += "<text class=\"tick\" x=\"" + C(left + bar_w * (i + 0.5)) + "\" y=\"" +
             C(plot_top + plot_h - h - 4) + "\" text-anchor=\"middle\">" + FormatCount(counts[i]) +
             "</text>";
    }
  }
  // Labels on bar edges, each with a tick mark down from the axis.
  const double step = bins.width * bins.label_every;
  int x_decimals = 0;  // enough to show the step exactly (0.25 needs 2)
  while (x_decimals < 4 && std::abs(step * std::pow(10.0, x_decimals) -
                                    std::round(step * std::pow(10.0, x_decimals))) > 1e-6) {
    ++x_decimals;
  }
  for (int i = 0; i <= num_bins; i += bins.label_every) {
    const double x = left + bar_w * i;
    out += "<line class=\"axis\" x1=\"" + C(x) + "\" x2=\"" + C(x) + "\" y1=\"" +
           C(plot_top + plot_h) + "\" y2=\"" + C(plot_top + plot_h + 4) +
           "\"/><text class=\"tick x-tick\" x=\"" + C(x) + "\" y=\"" + C(plot_top + plot_h + 16) +
           "\" text-anchor=\"middle\">" + Num(bins.width * i, x_decimals) + "</text>";
  }
  out += "<line class=\"axis\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) + "\" y1=\"" +
         C(plot_top + plot_h) + "\" y2=\"" + C(plot_top + plot_h) + "\"/>";
  out += "<text class=\"axis-title\" x=\"" + C((left + kChartWidth - right) / 2) + "\" y=\"" +
         C(height - 6) +
         "\" text-anchor=\"middle\">spread 100 \xC3\x97 |ln(Laspeyres / Paasche)|, %; bars count "
         "pairs</text></svg>\n";
  return out;
}

// The pairs with the widest spread (widest first), with every index formula.
std::string WorstPairsTable(const Context& ctx, const std::vector<SpreadPairIndices>& widest,
                            bool has_num_matched) {
  std::string out =
      "<h3>Pairs with the widest spread</h3><div class=\"table-scroll\"><table class=\"data\" "
      "id=\"worst-pairs\"><thead><tr>"
      "<th>region a</th><th>region b</th><th class=\"num\">Laspeyres</th><th "
      "class=\"num\">Paasche</th><th class=\"num\">Fisher</th><th "
      "class=\"num\">T\xC3\xB6rnqvist</th><th class=\"num\">P\xE2\x80\x93L spread, %</th><th "
      "class=\"num\">headings matched</th></tr></thead><tbody>";
  for (const SpreadPairIndices& p : widest) {
    out += "<tr><td>" + HtmlEscape(ctx.Label(p.a)) + "</td><td>" + HtmlEscape(ctx.Label(p.b)) +
           "</td><td class=\"num\">" + Num(100.0 * p.laspeyres, kTableParityDecimals) +
           "</td><td class=\"num\">" + Num(100.0 * p.paasche, kTableParityDecimals) +
           "</td><td class=\"num\">" + Num(100.0 * p.fisher, kTableParityDecimals) +
           "</td><td class=\"num\">" + Num(100.0 * p.tornqvist, kTableParityDecimals) +
           "</td><td class=\"num\">" + Num(100.0 * p.spread, 2) + "</td><td class=\"num\">" +
           (has_num_matched ? FormatCount(p.num_matched) : std::string("\xE2\x80\x93")) +
           "</td></tr>";
  }
  out +=
      "</tbody></table></div>\n<p class=\"note\">Indices compare region b with region a (a = 100). " +
      std::string(ctx.in.pair_tables_written ? kPairTablesWritten : kPairTablesLeftOut) +
      "</p>\n";
  return out;
}

// The section from the spreads in percent (`values`, any order; reordered)
// and the widest pairs.
std::string SpreadSectionOf(const Context& ctx, std::vector<double>* values,
                            const std::vector<SpreadPairIndices>& widest, bool has_num_matched) {
  std::string out = OpenSection("spread", "Spread of the bilateral comparisons");
  out +=
      "<p>For each pair of regions the Laspeyres index (basket of the first) and the Paasche index "
      "(basket of the second) bound the comparison; their gap, 100 \xC3\x97 |ln(L / P)|, shows how "
      "much the answer depends on whose basket is priced. Large gaps mean the two regions buy "
      "differently and price differently, and the choice of index formula matters for them.</p>\n";
  if (values->empty()) return out + "<p>No pair of regions shares a heading.</p></section>\n";
  const double largest = *std::max_element(values->begin(), values->end());
  // Drawn before the cards reorder the values (its counts do not depend
  // on their order anyway).
  const std::string histogram = SpreadHistogram(*values, largest);
  out += SpreadCards(values, largest);
  out += histogram;
  out += WorstPairsTable(ctx, widest, has_num_matched);
  return out + "</section>\n";
}

}  // namespace

std::string SpreadSection(const Context& ctx, const BilateralMatrices& b) {
  std::vector<SpreadPair> pairs = SpreadPairs(b);
  std::vector<double> values;
  values.reserve(pairs.size());
  for (const SpreadPair& p : pairs) values.push_back(100.0 * p.spread);
  constexpr size_t kWorstPairs = 12;
  const size_t k = std::min(kWorstPairs, pairs.size());
  std::partial_sort(pairs.begin(), pairs.begin() + k, pairs.end(),
                    [](const SpreadPair& x, const SpreadPair& y) {
                      return x.spread > y.spread ||
                             (x.spread == y.spread && (x.a < y.a || (x.a == y.a && x.b < y.b)));
                    });
  std::vector<SpreadPairIndices> widest(k);
  for (size_t i = 0; i < k; ++i) {
    const SpreadPair& p = pairs[i];
    widest[i] = {p.a, p.b, p.spread, b.laspeyres(p.a, p.b), b.paasche(p.a, p.b),
                 b.fisher(p.a, p.b), b.tornqvist(p.a, p.b),
                 b.num_matched.size() > 0 ? b.num_matched(p.a, p.b) : 0};
  }
  return SpreadSectionOf(ctx, &values, widest, b.num_matched.size() > 0);
}

std::string SpreadSection(const Context& ctx, const SpreadSummary& summary) {
  std::vector<double> values;
  values.reserve(summary.pair_spreads.size());
  for (double s : summary.pair_spreads) values.push_back(100.0 * s);
  return SpreadSectionOf(ctx, &values, summary.widest, true);
}

std::string OutlierSection(const Context& ctx, const std::vector<ReportOutlier>& outliers) {
  std::string out = OpenSection("outliers", "Flagged outliers");
  const std::string threshold = ctx.in.config != nullptr ? Num(ctx.in.config->outlier_threshold, 1)
                                                         : std::string("the threshold");
  if (ctx.in.num_cells_not_screenable > 0) {
    out += "<p class=\"note\">" + FormatCount(ctx.in.num_cells_not_screenable) +
           " cells could not be screened (no prediction can be formed for them: an item priced "
           "only in that region, a heading priced in one region, or a region priced in no other "
           "heading); nothing checked them. They "
           "are listed in <code>outliers.csv</code>.</p>\n";
  }
  if (outliers.empty()) {
    return out + "<p>No cell's standardised residual exceeds " + threshold +
           " in absolute value.</p></section>\n";
  }
  std::vector<const ReportOutlier*> sorted;
  for (const ReportOutlier& o : outliers) sorted.push_back(&o);
  std::stable_sort(sorted.begin(), sorted.end(),
                   [](const ReportOutlier* a, const ReportOutlier* b) {
                     return std::abs(a->standardised_residual) > std::abs(b->standardised_residual);
                   });
  // Counts per heading, largest first: where to look first.
  std::map<std::string, int> per_heading;
  for (const ReportOutlier& o : outliers) ++per_heading[o.heading];
  std::vector<std::pair<std::string, int>> headings(per_heading.begin(), per_heading.end());
  std::stable_sort(headings.begin(), headings.end(),
                   [](const auto& a, const auto& b) { return a.second > b.second; });
  out += "<p>" + FormatCount(static_cast<int64_t>(outliers.size())) +
         " cells (region \xC3\x97 item) have a standardised residual beyond \xC2\xB1" + threshold +
         ": their price is far from what the region's level and the item's price predict. Check "
         "units, package sizes and decimal points before trusting them. Most flagged headings: ";
  for (size_t i = 0; i < headings.size() && i < 5; ++i) {
    out += (i ? ", " : "") + HtmlEscape(headings[i].first) + " (" +
           FormatCount(headings[i].second) + ")";
  }
  out += ".</p>\n";
  constexpr size_t kMaxRows = 50;
  out +=
      "<div class=\"table-scroll\"><table class=\"data sortable\" "
      "id=\"outlier-table\"><thead><tr><th>heading</th>"
      "<th>region</th><th>item</th><th class=\"num\">observed</th><th class=\"num\">predicted</th>"
      "<th class=\"num\">ratio</th><th class=\"num\">std. residual</th><th "
      "class=\"num\">quotes</th></tr></thead><tbody>";
  for (size_t i = 0; i < sorted.size() && i < kMaxRows; ++i) {
    const ReportOutlier& o = *sorted[i];
    const double ratio = o.predicted > 0 ? o.observed / o.predicted : kNaN;
    auto labelled = [](const std::string& code, const std::string& label) {
      return HtmlEscape(code) + (label.empty() ? "" : " <small>" + HtmlEscape(label) + "</small>");
    };
    out += "<tr><td>" + labelled(o.heading, o.heading_label) + "</td><td>" + HtmlEscape(o.region) +
           "</td><td>" + labelled(o.item, o.item_label) + "</td><td class=\"num\" data-v=\"" +
           FormatFixed(o.observed, 6) + "\">" + Num(o.observed, 2) +
           "</td><td class=\"num\" data-v=\"" + FormatFixed(o.predicted, 6) + "\">" +
           Num(o.predicted, 2) + "</td><td class=\"num\" data-v=\"" +
           (std::isfinite(ratio) ? FormatFixed(ratio, 6) : "") + "\">" + Num(ratio, 2) +
           "</td><td class=\"num\" data-v=\"" + FormatFixed(o.standardised_residual, 6) + "\">" +
           Num(o.standardised_residual, 2) + "</td><td class=\"num\" data-v=\"" +
           std::to_string(o.num_quotes) + "\">" + FormatCount(o.num_quotes) + "</td></tr>";
  }
  out += "</tbody></table></div>\n";
  if (sorted.size() > kMaxRows) {
    out += "<p class=\"note\">The " + FormatCount(static_cast<int64_t>(kMaxRows)) + " largest of " +
           FormatCount(static_cast<int64_t>(sorted.size())) + " are shown.</p>\n";
  }
  return out + "</section>\n";
}

namespace {

std::string CoverageCurveChart(const std::vector<ReportSensitivity::CoveragePoint>& points) {
  std::vector<ReportSensitivity::CoveragePoint> p = points;
  std::sort(p.begin(), p.end(),
            [](const auto& a, const auto& b) { return a.coverage_share < b.coverage_share; });
  double y_max = 0.0;
  for (const auto& q : p) y_max = std::max(y_max, q.median_spread_pct);
  y_max = y_max > 0 ? y_max * 1.15 : 1.0;
  const double left = 60.0, right = 24.0, top = 16.0, plot_h = 220.0, height = top + plot_h + 44.0;
  const double plot_w = 640.0 - left - right;
  auto x = [&](double share) { return left + std::clamp(share, 0.0, 1.0) * plot_w; };
  auto y = [&](double v) { return top + plot_h - v / y_max * plot_h; };
  std::string out = "<svg class=\"chart\" id=\"coverage-curve\" viewBox=\"0 0 640 " + C(height) +
                    "\" style=\"max-width:640px\" role=\"img\" aria-label=\"coverage curve\">";
  const std::vector<double> y_ticks = NiceTicks(0, y_max, 5);
  for (double t : y_ticks) {
    out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(left + plot_w) + "\" y1=\"" +
           C(y(t)) + "\" y2=\"" + C(y(t)) + "\"/><text class=\"tick\" x=\"" + C(left - 6) +
           "\" y=\"" + C(y(t) + 4) + "\" text-anchor=\"end\">" + Num(t, TickDecimals(y_ticks)) +
           "</text>";
  }
  for (int t = 0; t <= 100; t += 20) {
    out += "<text class=\"tick\" x=\"" + C(x(t / 100.0)) + "\" y=\"" + C(top + plot_h + 16) +
           "\" text-anchor=\"middle\">" + std::to_string(t) + "</text>";
  }
  std::string path;
  for (const auto& q : p)
    path += (path.empty() ? "M" : "L") + C(x(q.coverage_share)) + " " + C(y(q.median_spread_pct));
  out += "<path class=\"line\" d=\"" + path + "\"/>";
  for (const auto& q : p) {
    out += "<circle class=\"dot\" cx=\"" + C(x(q.coverage_share)) + "\" cy=\"" +
           C(y(q.median_spread_pct)) + "\" r=\"3.5\"><title>" + Percent(q.coverage_share, 0) +
           " of items: " + Num(q.median_spread_pct, 2) + " %</title></circle>";
  }
  out += "<line class=\"axis\" x1=\"" + C(left) + "\" x2=\"" + C(left + plot_w) + "\" y1=\"" +
         C(top + plot_h) + "\" y2=\"" + C(top + plot_h) + "\"/>";
  out += "<text class=\"axis-title\" x=\"" + C(left + plot_w / 2) + "\" y=\"" + C(height - 6) +
         "\" text-anchor=\"middle\">share of each heading's items kept, %</text>";
  out += "<text class=\"axis-title\" transform=\"translate(14 " + C(top + plot_h / 2) +
         ") rotate(-90)\" text-anchor=\"middle\">median change, %</text></svg>\n";
  return out;
}

// Each method's price level as a difference from the main result, 100 x
// ln(method / main) (about a percentage): the differences are small next to
// the levels, and on a common zero they are visible at once.
struct MethodDiffs {
  const Context& ctx;
  const ReportSensitivity& s;
  double operator()(size_t m, int r) const {
    return 100.0 * std::log(s.method_parity[m][r] / ctx.root.parity(r));
  }
};

// A region's row of the chart: the range of the methods' differences.
struct MethodRow {
  int region;
  double lo, hi;
};

constexpr size_t kMaxMethodRows = 40;

// The rows in price-level order; when there are many, the rows where the
// methods disagree most. Sets *cut when rows were left out.
std::vector<MethodRow> MethodRows(const Context& ctx, const std::vector<size_t>& methods,
                                  const MethodDiffs& diff, bool* cut) {
  std::vector<MethodRow> rows;
  for (int r : ctx.order) {
    double lo = 0.0, hi = 0.0;
    for (size_t m : methods) {
      const double v = diff(m, r);
      if (!std::isfinite(v)) continue;
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
    rows.push_back({r, lo, hi});
  }
  *cut = rows.size() > kMaxMethodRows;
  if (*cut) {
    std::stable_sort(rows.begin(), rows.end(), [](const MethodRow& a, const MethodRow& b) {
      return a.hi - a.lo > b.hi - b.lo;
    });
    rows.resize(kMaxMethodRows);
    std::stable_sort(rows.begin(), rows.end(), [&](const MethodRow& a, const MethodRow& b) {
      return ctx.position[a.region] < ctx.position[b.region];
    });
  }
  return rows;
}

// The mark of a method: its shape tells the elementary method, its colour
// the aggregation method, so each combination has a mark of its own for up
// to 8 x 8 methods (shapes 8-15 repeat 0-7 open). Colours: the Okabe-Ito
// palette without its yellow, which is faint on white, and a brown (Okabe
// and Ito 2008, "Color Universal Design").
// `title`, when given, is the mark's tooltip.
std::string MethodMarker(size_t shape, size_t colour, double cx, double cy,
                         const std::string& title = "") {
  const size_t k = shape;
  const std::string cls =
      "marker m" + std::to_string(colour % 8) + (shape % 16 >= 8 ? " open" : "");
  const std::string head = "<path class=\"" + cls + "\" d=\"M";
  const std::string tail =
      title.empty() ? "\"/>" : "\"><title>" + HtmlEscape(title) + "</title></path>";
  auto p = [&](double dx, double dy) { return C(cx + dx) + " " + C(cy + dy); };
  switch (k % 8) {
    case 0:
      return "<circle class=\"" + cls + "\" cx=\"" + C(cx) + "\" cy=\"" + C(cy) + "\" r=\"4\"" +
             (title.empty() ? "/>" : "><title>" + HtmlEscape(title) + "</title></circle>");
    case 1:  // square
      return head + p(-3.5, -3.5) + "H" + C(cx + 3.5) + "V" + C(cy + 3.5) + "H" + C(cx - 3.5) +
             "Z" + tail;
    case 2:  // triangle, point up
      return head + p(0, -5) + "L" + p(4.5, 3.5) + "H" + C(cx - 4.5) + "Z" + tail;
    case 3:  // diamond
      return head + p(0, -5) + "L" + p(5, 0) + "L" + p(0, 5) + "L" + p(-5, 0) + "Z" + tail;
    case 4:  // triangle, point down
      return head + p(0, 5) + "L" + p(4.5, -3.5) + "H" + C(cx - 4.5) + "Z" + tail;
    case 5:  // plus
      return head + p(-1.6, -5) + "H" + C(cx + 1.6) + "V" + C(cy - 1.6) + "H" + C(cx + 5) + "V" +
             C(cy + 1.6) + "H" + C(cx + 1.6) + "V" + C(cy + 5) + "H" + C(cx - 1.6) + "V" +
             C(cy + 1.6) + "H" + C(cx - 5) + "V" + C(cy - 1.6) + "H" + C(cx - 1.6) + "Z" + tail;
    case 6:  // triangle, point right
      return head + p(5, 0) + "L" + p(-3.5, 4.5) + "V" + C(cy - 4.5) + "Z" + tail;
    default:  // triangle, point left
      return head + p(-5, 0) + "L" + p(3.5, 4.5) + "V" + C(cy - 4.5) + "Z" + tail;
  }
}

// The elementary (shape) and aggregation (colour) index of each method,
// from its name "elementary/aggregation", numbered in order of appearance;
// the names of each, for the legend.
struct MethodKeys {
  // The method's name, per method.
  std::vector<std::string> name;
  std::vector<size_t> shape, colour;
  std::vector<std::string> shape_names, colour_names;
};

MethodKeys KeysOf(const ReportSensitivity& s, const std::vector<size_t>& methods) {
  MethodKeys keys;
  auto index = [](std::vector<std::string>* names, const std::string& name) {
    const auto it = std::find(names->begin(), names->end(), name);
    if (it != names->end()) return static_cast<size_t>(it - names->begin());
    names->push_back(name);
    return names->size() - 1;
  };
  for (size_t m : methods) {
    const std::string& name = s.method_names[m];
    const size_t slash = name.find('/');
    const std::string elementary = slash == std::string::npos ? name : name.substr(0, slash);
    const std::string aggregation = slash == std::string::npos ? name : name.substr(slash + 1);
    keys.name.push_back(name);
    keys.shape.push_back(index(&keys.shape_names, elementary));
    keys.colour.push_back(index(&keys.colour_names, aggregation));
  }
  return keys;
}

// Vertical lanes for the marks of one row (0 = on the line, then +1, -1,
// +2, ...), so that marks closer than `min_gap` in x never hide one
// another: each mark, taken from left to right, goes to the first lane
// whose last mark is far enough to its left (a beeswarm). Past `max_lane`
// the lane with the most room is taken.
std::vector<int> DodgeLanes(const std::vector<double>& xs, double min_gap, int max_lane) {
  std::vector<size_t> order(xs.size());
  for (size_t k = 0; k < xs.size(); ++k) order[k] = k;
  std::stable_sort(order.begin(), order.end(), [&](size_t a, size_t b) { return xs[a] < xs[b]; });
  std::vector<int> candidates(1, 0);
  for (int l = 1; l <= max_lane; ++l) {
    candidates.push_back(l);
    candidates.push_back(-l);
  }
  std::map<int, double> last;  // lane -> x of its rightmost mark
  std::vector<int> lanes(xs.size(), 0);
  for (size_t k : order) {
    if (!std::isfinite(xs[k])) continue;
    int best = 0;
    double best_room = -1.0;
    for (int l : candidates) {
      const auto it = last.find(l);
      const double room = it == last.end() ? min_gap * 2 : xs[k] - it->second;
      if (room >= min_gap) {
        best = l;
        break;
      }
      if (room > best_room) {
        best_room = room;
        best = l;
      }
    }
    lanes[k] = best;
    last[best] = xs[k];
  }
  return lanes;
}

// Where the rows of the method-spread chart go. Marks (about 10 units
// wide) closer than kMarkGap move to lanes above and below the row's line,
// so none hides another; a row is as tall as its own lanes need.
struct SpreadRowLayout {
  static constexpr double lane_h = 8.0;
  // lanes[row][method]: 0 on the line, -1 above, +1 below, ...
  std::vector<std::vector<int>> lanes;
  // The y of each row's line, and of the bottom of the last row.
  std::vector<double> cy;
  double bottom = 0.0;
};

template <typename XFn>
SpreadRowLayout LayOutSpreadRows(const std::vector<size_t>& methods, const MethodDiffs& diff,
                                 const std::vector<MethodRow>& rows, const XFn& x, double top) {
  constexpr double kMarkGap = 7.0;
  constexpr int kMaxLane = 3;
  SpreadRowLayout layout;
  double y = top;
  for (const MethodRow& row : rows) {
    std::vector<double> xs;
    for (size_t m : methods) {
      const double v = diff(m, row.region);
      xs.push_back(std::isfinite(v) ? x(v) : kNaN);
    }
    layout.lanes.push_back(DodgeLanes(xs, kMarkGap, kMaxLane));
    int max_lane = 0;
    for (int l : layout.lanes.back()) max_lane = std::max(max_lane, std::abs(l));
    const double row_h = std::max(20.0, (2 * max_lane + 1) * SpreadRowLayout::lane_h + 8.0);
    layout.cy.push_back(y + row_h / 2);
    y += row_h;
  }
  layout.bottom = y;
  return layout;
}

// The chart: one row per region with the range of the methods and a mark
// for each.
std::string MethodSpreadSvg(const Context& ctx, const std::vector<size_t>& methods,
                            const MethodKeys& keys, const MethodDiffs& diff,
                            const std::vector<MethodRow>& rows) {
  double extent = 0.5;
  for (const MethodRow& row : rows) extent = std::max({extent, -row.lo, row.hi});
  const double hi = extent * 1.1, lo = -hi;
  size_t max_chars = 6;
  for (const MethodRow& row : rows) {
    max_chars = std::max(max_chars, CodePoints(ctx.Label(row.region)));
  }
  max_chars = std::min<size_t>(max_chars, 30);
  const double label_w = 18.0 + 6.6 * static_cast<double>(max_chars);
  const double top = 10.0, x0 = label_w + 16.0, x1 = kChartWidth - 110.0;
  auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
  const SpreadRowLayout layout = LayOutSpreadRows(methods, diff, rows, x, top);
  const double bottom = layout.bottom, height = bottom + 40.0;
  std::string out = "<svg class=\"chart\" id=\"method-spread\" viewBox=\"0 0 " + C(kChartWidth) +
                    " " + C(height) +
                    "\" role=\"img\" aria-label=\"price level of each region under each method\">";
  const std::vector<double> ticks = NiceTicks(lo, hi, 8);
  for (double t : ticks) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top) +
           "\" y2=\"" + C(bottom) + "\"/><text class=\"tick\" x=\"" + C(x(t)) + "\" y=\"" +
           C(bottom + 16) + "\" text-anchor=\"middle\">" + Num(t, TickDecimals(ticks)) + "</text>";
  }
  for (size_t i = 0; i < rows.size(); ++i) {
    const MethodRow& row = rows[i];
    const double cy = layout.cy[i];
    out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(cy + 4) +
           "\" text-anchor=\"end\">" + HtmlEscape(Truncate(ctx.Label(row.region), max_chars)) +
           "</text>";
    out += "<line class=\"range\" x1=\"" + C(x(row.lo)) + "\" x2=\"" + C(x(row.hi)) + "\" y1=\"" +
           C(cy) + "\" y2=\"" + C(cy) + "\"/>";
    for (size_t k = 0; k < methods.size(); ++k) {
      const double v = diff(methods[k], row.region);
      if (!std::isfinite(v)) continue;
      out +=
          MethodMarker(keys.shape[k], keys.colour[k], x(v), cy + layout.lane_h * layout.lanes[i][k],
                       keys.name[k] + ": " + (v >= 0 ? "+" : "") + Num(v, 2));
    }
    out += "<text class=\"value\" x=\"" + C(x1 + 10) + "\" y=\"" + C(cy + 4) + "\">" +
           Num(row.hi - row.lo, 2) + "</text>";
  }
  out += "<line class=\"main-mark\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" +
         C(top - 4) + "\" y2=\"" + C(bottom) + "\"/>";
  out += "<text class=\"tick\" x=\"" + C(x1 + 10) + "\" y=\"" + C(bottom + 16) + "\">range</text>";
  out += "<text class=\"axis-title\" x=\"" + C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) +
         "\" text-anchor=\"middle\">difference from the main result, 100 \xC3\x97 ln(method / "
         "main), %</text></svg>\n";
  return out;
}

std::string MethodSpreadChart(const Context& ctx, const ReportSensitivity& s) {
  const size_t num_methods = std::min(s.method_names.size(), s.method_parity.size());
  const size_t num_regions = static_cast<size_t>(ctx.survey.num_regions());
  std::vector<size_t> methods;
  for (size_t m = 0; m < num_methods; ++m) {
    if (s.method_parity[m].size() == num_regions) methods.push_back(m);
  }
  if (methods.empty()) return "";
  const MethodDiffs diff{ctx, s};
  bool cut = false;
  const std::vector<MethodRow> rows = MethodRows(ctx, methods, diff, &cut);
  const MethodKeys keys = KeysOf(s, methods);
  std::string out = MethodSpreadSvg(ctx, methods, keys, diff, rows);
  out +=
      "<div class=\"legend-row\" id=\"method-shapes\"><span class=\"key\"><svg width=\"14\" "
      "height=\"16\"><line class=\"main-mark\" x1=\"7\" x2=\"7\" y1=\"1\" y2=\"15\"/></svg> main "
      "result (0)</span>";
  out += "<span class=\"key\">shape: elementary method</span>";
  for (size_t k = 0; k < keys.shape_names.size(); ++k) {
    out += "<span class=\"key\"><svg width=\"14\" height=\"14\">" +
           MethodMarker(k, 6, 7, 7) + "</svg> " + HtmlEscape(keys.shape_names[k]) + "</span>";
  }
  out +=
      "</div>\n<div class=\"legend-row\" id=\"method-colours\"><span class=\"key\">colour: "
      "aggregation method</span>";
  for (size_t k = 0; k < keys.colour_names.size(); ++k) {
    out += "<span class=\"key\"><svg width=\"14\" height=\"14\">" +
           MethodMarker(0, k, 7, 7) + "</svg> " + HtmlEscape(keys.colour_names[k]) + "</span>";
  }
  out += "</div>\n";
  if (cut) {
    out += "<p class=\"note\">The " + FormatCount(static_cast<int64_t>(kMaxMethodRows)) +
           " regions where the methods disagree most are shown, in price-level order.</p>\n";
  }
  return out;
}

}  // namespace

std::string SensitivitySection(const Context& ctx, const ReportSensitivity& s) {
  std::string out = OpenSection("sensitivity", "Sensitivity");
  bool any = false;
  if (!s.coverage_curve.empty()) {
    any = true;
    out +=
        "<h3>Coverage curve</h3><p>The survey thinned to a share of each heading's items, and the "
        "median change of the regions' price levels for <b>" +
        HtmlEscape(ctx.root_code) +
        "</b> that follows. A curve that rises early means the parities lean on few prices.</p>\n" +
        CoverageCurveChart(s.coverage_curve);
  }
  const std::string methods = MethodSpreadChart(ctx, s);
  if (!methods.empty()) {
    any = true;
    out +=
        "<h3>Method spread</h3><p>How far each alternative method moves each region's price level "
        "from the main result. Where the marks lie far from zero, the region's parity depends on "
        "the method chosen as much as on its prices.</p>\n" +
        methods;
  }
  const std::string pairs = PairChartsHtml(ctx, s);
  if (!pairs.empty()) {
    any = true;
    out += pairs;
  }
  if (!s.parity_lower.empty()) {
    any = true;
    out += "<p>The intervals drawn in <a href=\"#price-levels\">Price levels</a> are: " +
           HtmlEscape(s.interval_label) + ".</p>\n";
  }
  if (!any) out += "<p>The sensitivity run gave no results to show.</p>\n";
  return out + "</section>\n";
}

}  // namespace paritas::internal::report
