// The price-level section: one bar per region (a compact column per region
// past kReportMaxLabelledBars) with the sensitivity intervals as whiskers,
// and the sortable table that names every region.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {
namespace {

// Interval of region r from the sensitivity run, when there is one.
bool Interval(const Context& ctx, int r, double* lower, double* upper) {
  const ReportSensitivity* s = ctx.in.sensitivity;
  if (s == nullptr || s->parity_lower.size() != static_cast<size_t>(ctx.survey.num_regions()) ||
      s->parity_upper.size() != s->parity_lower.size()) {
    return false;
  }
  *lower = s->parity_lower[r];
  *upper = s->parity_upper[r];
  return std::isfinite(*lower) && std::isfinite(*upper);
}

// The value axis of the chart: every price level, every interval and 100,
// with a little room at both ends.
struct LevelAxis {
  double lo = 100.0;
  double hi = 100.0;
  bool any_interval = false;
  std::vector<double> ticks;
  int tick_decimals = 0;
};

LevelAxis MakeLevelAxis(const Context& ctx) {
  LevelAxis axis;
  double lo = 100.0, hi = 100.0;
  for (int r : ctx.order) {
    lo = std::min(lo, ctx.root.parity(r));
    hi = std::max(hi, ctx.root.parity(r));
    double l, u;
    if (Interval(ctx, r, &l, &u)) {
      axis.any_interval = true;
      lo = std::min(lo, l);
      hi = std::max(hi, u);
    }
  }
  const double pad = 0.04 * (hi - lo) + 0.5;
  lo -= pad;
  hi += pad;
  axis.lo = lo;
  axis.hi = hi;
  axis.ticks = NiceTicks(lo, hi, 8);
  axis.tick_decimals = TickDecimals(axis.ticks);
  return axis;
}

// Where the labelled bars go: a label column, then the value axis.
struct BarLayout {
  size_t max_chars = 6;
  double label_w = 0.0;
  double row_h = 0.0;
  double top = 26.0;
  double x0 = 0.0;
  double x1 = kChartWidth - 52.0;
  double lo = 0.0;
  double hi = 0.0;

  double X(double v) const { return x0 + (v - lo) / (hi - lo) * (x1 - x0); }
};

BarLayout MakeBarLayout(const Context& ctx, const LevelAxis& axis) {
  const int n = static_cast<int>(ctx.order.size());
  BarLayout layout;
  for (int r : ctx.order) layout.max_chars = std::max(layout.max_chars, CodePoints(ctx.Label(r)));
  layout.max_chars = std::min<size_t>(layout.max_chars, 34);
  layout.label_w = 18.0 + 6.6 * static_cast<double>(layout.max_chars);
  layout.row_h = n <= 40 ? 22.0 : 16.0;
  layout.x0 = layout.label_w + 48.0;
  layout.lo = axis.lo;
  layout.hi = axis.hi;
  return layout;
}

// The bar of the region at rank i (0 = dearest): its label, the bar from 100
// to its level, the interval as a whisker and the value.
std::string LabelledBar(const Context& ctx, const DivergingScale& scale, const BarLayout& layout,
                        int i) {
  auto x = [&](double v) { return layout.X(v); };
  const double row_h = layout.row_h;
  const int r = ctx.order[i];
  const double p = ctx.root.parity(r);
  const double y = layout.top + row_h * i;
  const Rgb colour = scale.Colour(p);
  const double bx = std::min(x(100.0), x(p)), bw = std::max(1.0, std::abs(x(p) - x(100.0)));
  std::string tip = ctx.Label(r) + " (" + ctx.Code(r) + "): " + Num(p, kTableParityDecimals) +
                    ", rank " + std::to_string(i + 1);
  double l = kNaN, u = kNaN;
  const bool has_interval = Interval(ctx, r, &l, &u);
  if (has_interval) {
    tip += ", interval " + Num(l, kTableParityDecimals) + "\xE2\x80\x93" +
           Num(u, kTableParityDecimals);
  }
  std::string out = "<g><title>" + HtmlEscape(tip) + "</title>";
  out += "<text class=\"row-label\" x=\"" + C(layout.label_w) + "\" y=\"" + C(y + row_h / 2 + 4) +
         "\" text-anchor=\"end\">" + HtmlEscape(Truncate(ctx.Label(r), layout.max_chars)) +
         "</text>";
  out += "<rect class=\"pl-bar\" x=\"" + C(bx) + "\" y=\"" + C(y + 3) + "\" width=\"" + C(bw) +
         "\" height=\"" + C(row_h - 6) + "\" fill=\"" + Hex(colour) + "\"/>";
  double label_at = p;
  if (has_interval) {
    const double cy = y + row_h / 2;
    const std::string d = "M" + C(x(l)) + " " + C(cy) + "H" + C(x(u)) + "M" + C(x(l)) + " " +
                          C(cy - 4) + "V" + C(cy + 4) + "M" + C(x(u)) + " " + C(cy - 4) + "V" +
                          C(cy + 4);
    // A light halo keeps the whisker visible on dark bars.
    out += "<path class=\"halo\" d=\"" + d + "\"/><path class=\"whisker\" d=\"" + d + "\"/>";
    label_at = p >= 100 ? std::max(p, u) : std::min(p, l);
  }
  const bool right = p >= 100.0;
  out += "<text class=\"value\" x=\"" + C(x(label_at) + (right ? 4 : -4)) + "\" y=\"" +
         C(y + row_h / 2 + 4) + "\" text-anchor=\"" + (right ? "start" : "end") + "\">" +
         Num(p, kChartParityDecimals) + "</text></g>";
  return out;
}

// One labelled bar per region, drawn from 100 to its price level.
std::string LabelledBars(const Context& ctx, const DivergingScale& scale, const LevelAxis& axis) {
  const int n = static_cast<int>(ctx.order.size());
  const BarLayout layout = MakeBarLayout(ctx, axis);
  auto x = [&](double v) { return layout.X(v); };
  const double top = layout.top, row_h = layout.row_h;
  const double height = top + row_h * n + 34.0;
  std::string out = "<svg class=\"chart\" id=\"price-level-chart\" viewBox=\"0 0 " +
                    C(kChartWidth) + " " + C(height) +
                    "\" role=\"img\" aria-label=\"price level of each region, dearest first\">";
  for (double t : axis.ticks) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top - 6) +
           "\" y2=\"" + C(top + row_h * n) + "\"/><text class=\"tick\" x=\"" + C(x(t)) + "\" y=\"" +
           C(top + row_h * n + 16) + "\" text-anchor=\"middle\">" + Num(t, axis.tick_decimals) +
           "</text>";
  }
  out += "<text class=\"axis-title\" x=\"" + C((layout.x0 + layout.x1) / 2) + "\" y=\"" +
         C(height - 4) + "\" text-anchor=\"middle\">price level, " +
         HtmlEscape(ctx.root.reference_used) + " = 100</text>";
  for (int i = 0; i < n; ++i) out += LabelledBar(ctx, scale, layout, i);
  out += "<line class=\"reference\" x1=\"" + C(x(100)) + "\" x2=\"" + C(x(100)) + "\" y1=\"" +
         C(top - 10) + "\" y2=\"" + C(top + row_h * n) + "\"/><text class=\"tick\" x=\"" +
         C(x(100)) + "\" y=\"" + C(top - 14) +
         "\" text-anchor=\"middle\">100 = " + HtmlEscape(ctx.root.reference_used) + "</text>";
  out += "</svg>\n";
  return out;
}

// One thin column per region in rank order: the profile stays legible at
// any number of regions; the table below names each one.
std::string RankColumns(const Context& ctx, const DivergingScale& scale, const LevelAxis& axis) {
  const int n = static_cast<int>(ctx.order.size());
  const double lo = axis.lo, hi = axis.hi;
  const double left = 56.0, right = 16.0, top = 28.0, plot_h = 300.0;
  const double height = top + plot_h + 46.0;
  const double col_w = (kChartWidth - left - right) / n;
  auto y = [&](double v) { return top + (hi - v) / (hi - lo) * plot_h; };
  std::string out = "<svg class=\"chart\" id=\"price-level-chart\" viewBox=\"0 0 " +
                    C(kChartWidth) + " " + C(height) +
                    "\" role=\"img\" aria-label=\"price level of each region by rank\">";
  for (double t : axis.ticks) {
    out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) +
           "\" y1=\"" + C(y(t)) + "\" y2=\"" + C(y(t)) + "\"/><text class=\"tick\" x=\"" +
           C(left - 6) + "\" y=\"" + C(y(t) + 4) + "\" text-anchor=\"end\">" +
           Num(t, axis.tick_decimals) + "</text>";
  }
  for (int i = 0; i < n; ++i) {
    const int r = ctx.order[i];
    const double p = ctx.root.parity(r);
    const double top_y = std::min(y(p), y(100.0)), h = std::max(0.5, std::abs(y(p) - y(100.0)));
    out += "<rect class=\"pl-bar compact\" x=\"" + C(left + col_w * i) + "\" y=\"" + C(top_y) +
           "\" width=\"" + FormatFixed(std::max(col_w, 0.6), 2) + "\" height=\"" + C(h) +
           "\" fill=\"" + Hex(scale.Colour(p)) + "\"><title>" +
           HtmlEscape(ctx.Label(r) + " (" + ctx.Code(r) + "): " + Num(p, kTableParityDecimals)) +
           "</title></rect>";
    double l, u;
    if (Interval(ctx, r, &l, &u)) {
      const double cx = left + col_w * (i + 0.5);
      out += "<line class=\"whisker thin\" x1=\"" + C(cx) + "\" x2=\"" + C(cx) + "\" y1=\"" +
             C(y(u)) + "\" y2=\"" + C(y(l)) + "\"/>";
    }
  }
  out += "<line class=\"reference\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) +
         "\" y1=\"" + C(y(100)) + "\" y2=\"" + C(y(100)) + "\"/>";
  const std::vector<double> rank_ticks = NiceTicks(1, n, 10);
  for (double t : rank_ticks) {
    if (t < 1) continue;
    const double cx = left + col_w * (t - 0.5);
    out += "<text class=\"tick\" x=\"" + C(cx) + "\" y=\"" + C(top + plot_h + 16) +
           "\" text-anchor=\"middle\">" + Num(t, 0) + "</text>";
  }
  out += "<text class=\"axis-title\" x=\"" + C((left + kChartWidth - right) / 2) + "\" y=\"" +
         C(height - 6) +
         "\" text-anchor=\"middle\">rank (1 = dearest); one column per region</text>";
  out += "<text class=\"axis-title\" transform=\"translate(14 " + C(top + plot_h / 2) +
         ") rotate(-90)\" text-anchor=\"middle\">price level, " +
         HtmlEscape(ctx.root.reference_used) + " = 100</text>";
  const int dear = ctx.order.front(), cheap = ctx.order.back();
  out += "<text class=\"value\" x=\"" + C(left + 8) + "\" y=\"" + C(top - 10) +
         "\">dearest: " + HtmlEscape(Truncate(ctx.Label(dear), 40)) + " " +
         Num(ctx.root.parity(dear), kChartParityDecimals) + "</text><text class=\"value\" x=\"" +
         C(kChartWidth - right - 4) + "\" y=\"" + C(top + plot_h - 6) +
         "\" text-anchor=\"end\">cheapest: " + HtmlEscape(Truncate(ctx.Label(cheap), 40)) + " " +
         Num(ctx.root.parity(cheap), kChartParityDecimals) + "</text>";
  out += "</svg>\n";
  return out;
}

std::string PriceLevelChart(const Context& ctx, const DivergingScale& scale) {
  const LevelAxis axis = MakeLevelAxis(ctx);
  std::string out = static_cast<int>(ctx.order.size()) <= kReportMaxLabelledBars
                        ? LabelledBars(ctx, scale, axis)
                        : RankColumns(ctx, scale, axis);
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-price-level");
  if (axis.any_interval) {
    out +=
        "<span class=\"key\"><svg width=\"34\" height=\"12\"><path class=\"whisker key-mark\" "
        "d=\"M2 6H32M2 2V10M32 2V10\"/></svg> " +
        HtmlEscape(ctx.in.sensitivity->interval_label) + "</span>";
  }
  out += "</div>\n";
  return out;
}

// The optional columns of the price-level table.
struct TableColumns {
  bool names = false;       // region names
  bool intervals = false;   // lower and upper bounds
  bool per_capita = false;  // real expenditure per head
  bool spreads = false;     // Paasche-Laspeyres spreads
};

std::string TableHead(const TableColumns& columns, bool tall) {
  std::string out = "<div class=\"table-scroll" + std::string(tall ? " tall" : "") +
                    "\"><table class=\"data sortable\" id=\"price-level-table\"><thead><tr>"
                    "<th class=\"num\">rank</th><th>region</th>";
  if (columns.names) out += "<th>name</th>";
  out += "<th class=\"num\">price level</th>";
  if (columns.intervals) out += "<th class=\"num\">lower</th><th class=\"num\">upper</th>";
  if (columns.per_capita) {
    out +=
        "<th class=\"num\" title=\"real expenditure per head, whole country = 100\">real per "
        "head</th>";
  }
  out += "<th class=\"num\">headings</th>";
  if (columns.spreads) {
    out +=
        "<th class=\"num\" title=\"median over partners of 100 |ln(Laspeyres / Paasche)|\">median "
        "P\xE2\x80\x93L spread, %</th><th class=\"num\">largest, %</th><th>with</th>";
  }
  out += "</tr></thead><tbody>";
  return out;
}

// A numeric cell that sorts by its full value.
std::string NumCell(double v, int decimals) {
  return "<td class=\"num\" data-v=\"" + (std::isfinite(v) ? FormatFixed(v, 6) : std::string()) +
         "\">" + Num(v, decimals) + "</td>";
}

// The row of the region at rank i (0 = dearest).
std::string TableRow(const Context& ctx, const TableColumns& columns,
                     const std::vector<RegionSpread>& spreads, size_t i) {
  const int r = ctx.order[i];
  std::string out =
      "<tr>" + NumCell(static_cast<double>(i + 1), 0) + "<td>" + HtmlEscape(ctx.Code(r)) +
      WarningMark(ctx, 0, r) + "</td>";
  if (columns.names) {
    const bool named = r < static_cast<int>(ctx.survey.region_name.size());
    out += "<td>" + HtmlEscape(named ? ctx.survey.region_name[r] : "") + "</td>";
  }
  out += NumCell(ctx.root.parity(r), kTableParityDecimals);
  if (columns.intervals) {
    double l = kNaN, u = kNaN;
    Interval(ctx, r, &l, &u);
    out += NumCell(l, kTableParityDecimals) + NumCell(u, kTableParityDecimals);
  }
  if (columns.per_capita) out += NumCell(ctx.root.real_per_capita_index(r), 1);
  out += NumCell(ctx.root.num_headings.size() > r ? ctx.root.num_headings(r) : kNaN, 0);
  if (columns.spreads) {
    const RegionSpread& s = spreads[r];
    out += NumCell(100.0 * s.median, 2) + NumCell(100.0 * s.max, 2) + "<td>" +
           (s.worst_partner >= 0 ? HtmlEscape(ctx.Code(s.worst_partner)) : std::string()) + "</td>";
  }
  out += "</tr>";
  return out;
}

std::string PriceLevelTable(const Context& ctx, const std::vector<RegionSpread>& spreads) {
  TableColumns columns;
  columns.names = ctx.HasNames();
  for (int r : ctx.order) {
    double l, u;
    columns.intervals = columns.intervals || Interval(ctx, r, &l, &u);
  }
  columns.per_capita = ctx.root.real_per_capita_index.size() > 0 &&
                       ctx.root.real_per_capita_index.array().isFinite().any();
  columns.spreads = !spreads.empty();
  std::string out = TableHead(columns, ctx.order.size() > 40);
  for (size_t i = 0; i < ctx.order.size(); ++i) out += TableRow(ctx, columns, spreads, i);
  out +=
      "</tbody></table></div>\n<p class=\"note\">Click a column heading to sort. Parities in full "
      "precision are in <code>parities.csv</code>.</p>\n";
  return out;
}

}  // namespace

std::string PriceLevelSection(const Context& ctx, const std::vector<RegionSpread>& spreads) {
  double max_ratio = 1.0;
  for (int r : ctx.order) max_ratio = std::max(max_ratio, FoldedRatio(ctx.root.parity(r)));
  const bool has_intervals =
      ctx.in.sensitivity != nullptr && !ctx.in.sensitivity->parity_lower.empty();
  std::string out = OpenSection("price-levels", "Price levels");
  out += "<p>Price level of every region for <b>" + HtmlEscape(ctx.root_code) +
         "</b>, dearest first (" + HtmlEscape(ctx.root.reference_used) +
         " = 100). A bar runs from 100 to the region's level" +
         std::string(has_intervals ? "; whiskers show the interval from the sensitivity run."
                                   : ". The aggregate has no standard error of its own; see the "
                                     "cautions on sampling error.") +
         "</p>\n";
  out += PriceLevelChart(ctx, MakeDivergingScale(max_ratio));
  out += PriceLevelTable(ctx, spreads);
  out += "</section>\n";
  return out;
}

}  // namespace paritas::internal::report
