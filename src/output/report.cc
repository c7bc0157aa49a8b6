// The report page. Every chart is inline SVG drawn here from the result, so
// the page needs nothing from outside, and every text from the data passes
// through HtmlEscape on its way in. Grids are thinned (every k-th region by
// price level) or binned past kReportMaxGridRegions so a survey of 1,000
// regions still gives a page of a few hundred kilobytes that opens at once.
// Colour is never the only channel: cells and bars carry their values.
#include "paritas/output/report.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <functional>
#include <limits>
#include <map>
#include <numeric>
#include <set>
#include <string>
#include <vector>

#include "paritas/output/output_writers.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Width of every chart in SVG units; charts scale down with the page.
constexpr double kChartWidth = 1000.0;

// ---------------------------------------------------------------------------
// Number formats, one rule per kind of number, used everywhere on the page.

// Parities in charts: 1 decimal; in tables: 2.
constexpr int kChartParityDecimals = 1;
constexpr int kTableParityDecimals = 2;

// Returns `value` with `decimals` digits, or an en dash for NaN.
std::string Num(double value, int decimals) {
  if (!std::isfinite(value)) return "\xE2\x80\x93";
  return FormatFixed(value, decimals);
}

// Returns a share in [0, 1] as a percentage, e.g. "12.3 %".
std::string Percent(double share, int decimals) {
  if (!std::isfinite(share)) return "\xE2\x80\x93";
  return FormatFixed(100.0 * share, decimals) + "\xC2\xA0%";
}

// Returns an SVG coordinate (one decimal is finer than a pixel).
std::string C(double value) { return FormatFixed(value, 1); }

// Returns the first `max_chars` code points of UTF-8 text, with an ellipsis
// when cut, so labels fit their column without splitting a character.
std::string Truncate(std::string_view text, size_t max_chars) {
  size_t chars = 0;
  for (size_t i = 0; i < text.size(); ++i) {
    if ((static_cast<unsigned char>(text[i]) & 0xC0) != 0x80) {
      if (chars == max_chars) return std::string(text.substr(0, i)) + "\xE2\x80\xA6";
      ++chars;
    }
  }
  return std::string(text);
}

size_t CodePoints(std::string_view text) {
  size_t n = 0;
  for (char c : text) n += (static_cast<unsigned char>(c) & 0xC0) != 0x80;
  return n;
}

// ---------------------------------------------------------------------------
// Colour scales. Both vary lightness monotonically from end to end, so they
// read in greyscale, and avoid red-green contrasts.

struct Rgb {
  double r, g, b;
};

template <size_t N>
Rgb Interpolate(const std::array<Rgb, N>& stops, double t) {
  t = std::clamp(std::isfinite(t) ? t : 0.5, 0.0, 1.0) * (N - 1);
  const size_t i = std::min(static_cast<size_t>(t), N - 2);
  const double f = t - i;
  return {stops[i].r + f * (stops[i + 1].r - stops[i].r), stops[i].g + f * (stops[i + 1].g - stops[i].g),
          stops[i].b + f * (stops[i + 1].b - stops[i].b)};
}

std::string Hex(Rgb c) {
  char buffer[8];
  std::snprintf(buffer, sizeof(buffer), "#%02x%02x%02x", static_cast<int>(std::lround(c.r)),
                static_cast<int>(std::lround(c.g)), static_cast<int>(std::lround(c.b)));
  return buffer;
}

// True when dark text is more legible than white on `c` (relative luminance
// after WCAG 2.x, threshold common practice).
bool WantsDarkText(Rgb c) {
  auto linear = [](double v) {
    v /= 255.0;
    return v <= 0.03928 ? v / 12.92 : std::pow((v + 0.055) / 1.055, 2.4);
  };
  const double luminance = 0.2126 * linear(c.r) + 0.7152 * linear(c.g) + 0.0722 * linear(c.b);
  return luminance > 0.22;
}

// Price levels: dark blue (cheaper) through a neutral grey-violet at 100 to
// orange and pale yellow (dearer). Blue against orange is the contrast that
// the common forms of colour-vision deficiency keep, and lightness rises
// steadily from end to end (about L* 12 to 91), so the scale also reads in
// greyscale; stops hand-coded for this report.
constexpr std::array<Rgb, 9> kDivergingStops = {{{11, 29, 74},
                                                 {28, 53, 111},
                                                 {52, 81, 143},
                                                 {91, 107, 158},
                                                 {138, 135, 153},
                                                 {184, 145, 106},
                                                 {217, 162, 78},
                                                 {239, 193, 96},
                                                 {250, 229, 155}}};
// Coverage shares: pale yellow to dark green, after ColorBrewer's YlGn
// (Harrower and Brewer 2003, The Cartographic Journal 40(1); values
// approximated from memory); one hue family, lightness falling with the
// share, and distinct from the price-level scale.
constexpr std::array<Rgb, 7> kSequentialStops = {{{255, 255, 229},
                                                  {217, 240, 163},
                                                  {173, 221, 142},
                                                  {120, 198, 121},
                                                  {65, 171, 93},
                                                  {35, 132, 67},
                                                  {0, 90, 50}}};

// A symmetric scale for price levels: ratio `span` >= 1 maps to the top end
// and 1 / span to the bottom, 100 to the middle.
struct DivergingScale {
  double span = 1.25;
  // True when some values lie beyond the span and take the end colours.
  bool clamped = false;
  double T(double parity) const { return 0.5 + 0.5 * std::log(parity / 100.0) / std::log(span); }
  Rgb Colour(double parity) const { return Interpolate(kDivergingStops, T(parity)); }
};

// Returns the smallest readable span covering ratios up to `max_ratio`.
DivergingScale MakeDivergingScale(double max_ratio) {
  static constexpr double kSpans[] = {1.05, 1.1, 1.15, 1.2, 1.25, 1.3, 1.4, 1.5,
                                      1.6,  1.8, 2.0,  2.5, 3.0,  4.0, 5.0, 10.0};
  DivergingScale scale;
  scale.span = kSpans[sizeof(kSpans) / sizeof(kSpans[0]) - 1];
  for (double s : kSpans) {
    if (s >= max_ratio - 1e-12) {
      scale.span = s;
      break;
    }
  }
  return scale;
}

// Folds a parity into the ratio to 100 as seen from either side.
double FoldedRatio(double parity) {
  if (!std::isfinite(parity) || parity <= 0) return 1.0;
  return std::max(parity / 100.0, 100.0 / parity);
}

// A scale for a grid: spans the 95th percentile of the values' distances
// from 100, so one extreme cell does not wash out the rest (it takes the
// end colour, and its label still tells its value).
DivergingScale GridScale(const std::vector<std::vector<double>>& values) {
  std::vector<double> ratios;
  for (const std::vector<double>& row : values) {
    for (double v : row) {
      if (std::isfinite(v) && v > 0) ratios.push_back(FoldedRatio(v));
    }
  }
  if (ratios.empty()) return MakeDivergingScale(1.0);
  std::sort(ratios.begin(), ratios.end());
  DivergingScale scale = MakeDivergingScale(ratios[static_cast<size_t>(0.95 * (ratios.size() - 1))]);
  scale.clamped = ratios.back() > scale.span * (1 + 1e-12);
  return scale;
}

// Nice tick positions covering [lo, hi], about `target` of them.
std::vector<double> NiceTicks(double lo, double hi, int target) {
  std::vector<double> ticks;
  if (!(hi > lo)) return {lo};
  const double raw = (hi - lo) / std::max(1, target);
  const double magnitude = std::pow(10.0, std::floor(std::log10(raw)));
  double step = magnitude;
  for (double m : {1.0, 2.0, 2.5, 5.0, 10.0}) {
    step = m * magnitude;
    if (step >= raw) break;
  }
  for (double t = std::ceil(lo / step - 1e-9) * step; t <= hi + 1e-9 * step; t += step) {
    ticks.push_back(std::abs(t) < 1e-12 * step ? 0.0 : t);
  }
  return ticks;
}

// Decimals that show ticks of this spacing without noise.
int TickDecimals(const std::vector<double>& ticks) {
  if (ticks.size() < 2) return 0;
  const double step = ticks[1] - ticks[0];
  if (step >= 1.0 - 1e-9) return 0;
  if (step >= 0.1 - 1e-9) return 1;
  return 2;
}

// A horizontal gradient legend with labelled ends and middle.
std::string DivergingLegend(const DivergingScale& scale, const std::string& id) {
  std::string out = "<svg class=\"legend\" viewBox=\"0 0 360 40\" width=\"360\" height=\"40\" role=\"img\" "
                    "aria-label=\"colour scale of price levels\"><defs><linearGradient id=\"" + id + "\">";
  for (int i = 0; i <= 8; ++i) {
    out += "<stop offset=\"" + FormatFixed(i / 8.0, 3) + "\" stop-color=\"" +
           Hex(Interpolate(kDivergingStops, i / 8.0)) + "\"/>";
  }
  out += "</linearGradient></defs><rect x=\"60\" y=\"4\" width=\"240\" height=\"12\" fill=\"url(#" + id +
         ")\" stroke=\"#888\" stroke-width=\"0.5\"/>";
  const double lo = 100.0 / scale.span, hi = 100.0 * scale.span;
  const std::string at_most = scale.clamped ? "\xE2\x89\xA4\xC2\xA0" : "";
  const std::string at_least = scale.clamped ? "\xE2\x89\xA5\xC2\xA0" : "";
  out += "<text x=\"60\" y=\"30\" text-anchor=\"middle\">" + at_most + Num(lo, 1) + "</text>";
  out += "<text x=\"180\" y=\"30\" text-anchor=\"middle\">100</text>";
  out += "<text x=\"300\" y=\"30\" text-anchor=\"middle\">" + at_least + Num(hi, 1) + "</text>";
  out += "<text x=\"54\" y=\"14\" text-anchor=\"end\" class=\"muted\">cheaper</text>";
  out += "<text x=\"306\" y=\"14\" class=\"muted\">dearer</text></svg>";
  return out;
}

std::string SequentialLegend(const std::string& id) {
  std::string out = "<svg class=\"legend\" viewBox=\"0 0 360 40\" width=\"360\" height=\"40\" role=\"img\" "
                    "aria-label=\"colour scale of coverage\"><defs><linearGradient id=\"" + id + "\">";
  for (int i = 0; i <= 6; ++i) {
    out += "<stop offset=\"" + FormatFixed(i / 6.0, 3) + "\" stop-color=\"" +
           Hex(Interpolate(kSequentialStops, i / 6.0)) + "\"/>";
  }
  out += "</linearGradient></defs><rect x=\"60\" y=\"4\" width=\"240\" height=\"12\" fill=\"url(#" + id +
         ")\" stroke=\"#888\" stroke-width=\"0.5\"/>";
  out += "<text x=\"60\" y=\"30\" text-anchor=\"middle\">0\xC2\xA0%</text>";
  out += "<text x=\"180\" y=\"30\" text-anchor=\"middle\">50\xC2\xA0%</text>";
  out += "<text x=\"300\" y=\"30\" text-anchor=\"middle\">100\xC2\xA0%</text>";
  out += "<text x=\"54\" y=\"14\" text-anchor=\"end\" class=\"muted\">none</text>";
  out += "<text x=\"306\" y=\"14\" class=\"muted\">all items</text></svg>";
  return out;
}

// ---------------------------------------------------------------------------
// The page context: the regions in price-level order and their labels.

struct Context {
  const ReportInputs& in;
  const Survey& survey;
  const ParityResult& result;
  const NodeResult& root;
  std::string root_code;
  // Regions with a root parity, dearest first (ties by survey order).
  std::vector<int> order;
  // Regions without one.
  std::vector<int> missing;
  // Rank position of each region in `order`; -1 when missing.
  std::vector<int> position;

  std::string Code(int r) const { return std::string(survey.regions.Code(r)); }
  // The region's name when given, else its code.
  std::string Label(int r) const {
    const std::string& name = r < static_cast<int>(survey.region_name.size()) ? survey.region_name[r] : "";
    return name.empty() ? Code(r) : name;
  }
  bool HasNames() const {
    for (const std::string& name : survey.region_name) {
      if (!name.empty()) return true;
    }
    return false;
  }
};

// Returns at most `max_count` of `order`, evenly spaced and keeping both
// ends, so a thinned grid still spans the dearest to the cheapest.
std::vector<int> EveryKth(const std::vector<int>& order, int max_count) {
  const int n = static_cast<int>(order.size());
  if (n <= max_count) return order;
  std::vector<int> out;
  for (int i = 0; i < max_count; ++i) {
    out.push_back(order[static_cast<size_t>(std::llround(static_cast<double>(i) * (n - 1) / (max_count - 1)))]);
  }
  out.erase(std::unique(out.begin(), out.end()), out.end());
  return out;
}

std::string ThinningNote(const Context& ctx, size_t shown, const std::string& where) {
  if (shown >= ctx.order.size()) return "";
  return "<p class=\"note\">" + FormatCount(static_cast<int64_t>(shown)) + " of " +
         FormatCount(static_cast<int64_t>(ctx.order.size())) +
         " regions shown: every k-th by price level, from the dearest to the cheapest. " + where + "</p>\n";
}

// ---------------------------------------------------------------------------
// Sections.

std::string OpenSection(const std::string& id, const std::string& title) {
  return "<section id=\"" + id + "\"><h2>" + title + "</h2>\n";
}

std::string Card(const std::string& value, const std::string& label) {
  return "<div class=\"card\"><div class=\"value\">" + value + "</div><div class=\"label\">" + label +
         "</div></div>";
}

std::string Overview(const Context& ctx) {
  const Survey& s = ctx.survey;
  std::string out = OpenSection("overview", "Overview");
  int num_aggregates = 0;
  for (const ClassificationNode& node : s.classification.nodes()) num_aggregates += node.is_leaf ? 0 : 1;
  const double possible = static_cast<double>(s.num_regions()) * s.num_items();
  const double coverage = possible > 0 ? static_cast<double>(s.cells.size()) / possible : kNaN;
  out += "<div class=\"cards\">";
  out += Card(FormatCount(s.num_regions()), "regions");
  out += Card(FormatCount(s.num_headings()), "basic headings");
  out += Card(FormatCount(num_aggregates), "aggregates");
  out += Card(FormatCount(s.num_items()), "items");
  out += Card(FormatCount(s.num_quotes), "price quotes");
  out += Card(FormatCount(static_cast<int64_t>(s.cells.size())), "priced cells");
  out += Card(Percent(coverage, 1), "region \xC3\x97 item coverage");
  out += "</div>\n";

  if (!ctx.order.empty()) {
    const int dear = ctx.order.front(), cheap = ctx.order.back();
    out += "<p class=\"lead\">Across the " + FormatCount(static_cast<int64_t>(ctx.order.size())) +
           " regions with a price level for <b>" + HtmlEscape(ctx.root_code) + "</b>, the dearest is <b>" +
           HtmlEscape(ctx.Label(dear)) + "</b> at " + Num(ctx.root.parity(dear), kChartParityDecimals) +
           " and the cheapest <b>" + HtmlEscape(ctx.Label(cheap)) + "</b> at " +
           Num(ctx.root.parity(cheap), kChartParityDecimals) + " (" + HtmlEscape(ctx.root.reference_used) +
           " = 100): the same basket costs " +
           Num(ctx.root.parity(dear) / ctx.root.parity(cheap), 2) + " times as much in one as in the other.</p>\n";
  }

  out += "<table class=\"facts\"><tbody>";
  auto fact = [&](const std::string& key, const std::string& value) {
    out += "<tr><th scope=\"row\">" + key + "</th><td>" + value + "</td></tr>";
  };
  if (ctx.in.config != nullptr) {
    const RunConfig& c = *ctx.in.config;
    fact("Basic headings", HtmlEscape(c.elementary) + " (parities within each heading from item prices)");
    fact("Aggregates", HtmlEscape(c.aggregation) + " (headings combined with expenditure weights)");
    fact("Reference", HtmlEscape(c.reference.ToString()) + " = 100" +
                          (ctx.root.reference_used != c.reference.ToString()
                               ? " (used: " + HtmlEscape(ctx.root.reference_used) + ")"
                               : std::string()));
    if (c.representative_weight != 1.0) {
      fact("Representative items", "weight " + Num(c.representative_weight, 2) + " in CPD");
    }
    fact("Invalid rows", HtmlEscape(ToString(c.invalid_rows)));
    if (!c.config_path.empty()) fact("Configuration", "<code>" + HtmlEscape(c.config_path) + "</code>");
  } else {
    fact("Reference", HtmlEscape(ctx.root.reference_used) + " = 100");
  }
  if (ctx.in.compute != nullptr) {
    fact("Headings with parities", FormatCount(ctx.in.compute->num_headings_used) + " of " +
                                       FormatCount(ctx.in.compute->num_headings_given));
  }
  if (!ctx.missing.empty()) {
    std::string codes;
    for (size_t i = 0; i < ctx.missing.size() && i < 20; ++i) codes += (i ? ", " : "") + HtmlEscape(ctx.Code(ctx.missing[i]));
    if (ctx.missing.size() > 20) codes += ", \xE2\x80\xA6";
    fact("Regions without a price level", FormatCount(static_cast<int64_t>(ctx.missing.size())) + ": " + codes);
  }
  out += "</tbody></table>\n";

  if (ctx.in.load != nullptr && !ctx.in.load->files.empty()) {
    out += "<h3>Input files</h3><table class=\"data\"><thead><tr><th>file</th><th>path</th><th class=\"num\">rows "
           "read</th><th class=\"num\">used</th><th class=\"num\">rejected</th><th>SHA-256</th></tr></thead><tbody>";
    for (const InputFileSummary& f : ctx.in.load->files) {
      if (!f.given) continue;
      out += "<tr><td>" + HtmlEscape(f.role) + "</td><td><code>" + HtmlEscape(f.path) + "</code></td><td class=\"num\">" +
             FormatCount(f.rows_read) + "</td><td class=\"num\">" + FormatCount(f.rows_used) + "</td><td class=\"num\">" +
             FormatCount(f.rows_rejected) + "</td><td><code title=\"" + HtmlEscape(f.sha256) + "\">" +
             HtmlEscape(f.sha256.substr(0, 12)) + "\xE2\x80\xA6</code></td></tr>";
    }
    out += "</tbody></table>\n";
  }

  // Warnings: the job's, then any of the loader's not already among them.
  std::vector<std::string> warnings = ctx.in.warnings;
  if (ctx.in.load != nullptr) {
    for (const std::string& w : ctx.in.load->warnings) {
      if (std::find(warnings.begin(), warnings.end(), w) == warnings.end()) warnings.push_back(w);
    }
  }
  out += "<h3 id=\"warnings\">Warnings</h3>";
  if (warnings.empty()) {
    out += "<p>None.</p>\n";
  } else {
    constexpr size_t kMaxWarnings = 50;
    out += "<ul class=\"warnings\">";
    for (size_t i = 0; i < warnings.size() && i < kMaxWarnings; ++i) out += "<li>" + HtmlEscape(warnings[i]) + "</li>";
    if (warnings.size() > kMaxWarnings) {
      out += "<li>and " + FormatCount(static_cast<int64_t>(warnings.size() - kMaxWarnings)) + " more (see run.json)</li>";
    }
    out += "</ul>\n";
  }
  return out + "</section>\n";
}

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

std::string PriceLevelChart(const Context& ctx, const DivergingScale& scale) {
  const int n = static_cast<int>(ctx.order.size());
  double lo = 100.0, hi = 100.0;
  bool any_interval = false;
  for (int r : ctx.order) {
    lo = std::min(lo, ctx.root.parity(r));
    hi = std::max(hi, ctx.root.parity(r));
    double l, u;
    if (Interval(ctx, r, &l, &u)) {
      any_interval = true;
      lo = std::min(lo, l);
      hi = std::max(hi, u);
    }
  }
  const double pad = 0.04 * (hi - lo) + 0.5;
  lo -= pad;
  hi += pad;
  const std::vector<double> ticks = NiceTicks(lo, hi, 8);
  const int tick_decimals = TickDecimals(ticks);
  std::string out;

  if (n <= kReportMaxLabelledBars) {
    // One labelled bar per region, drawn from 100 to its price level.
    size_t max_chars = 6;
    for (int r : ctx.order) max_chars = std::max(max_chars, CodePoints(ctx.Label(r)));
    max_chars = std::min<size_t>(max_chars, 34);
    const double label_w = 18.0 + 6.6 * static_cast<double>(max_chars);
    const double row_h = n <= 40 ? 22.0 : 16.0;
    const double top = 26.0, x0 = label_w + 48.0, x1 = kChartWidth - 52.0;
    const double height = top + row_h * n + 34.0;
    auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
    out += "<svg class=\"chart\" id=\"price-level-chart\" viewBox=\"0 0 " + C(kChartWidth) + " " + C(height) +
           "\" role=\"img\" aria-label=\"price level of each region, dearest first\">";
    for (double t : ticks) {
      out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top - 6) + "\" y2=\"" +
             C(top + row_h * n) + "\"/><text class=\"tick\" x=\"" + C(x(t)) + "\" y=\"" + C(top + row_h * n + 16) +
             "\" text-anchor=\"middle\">" + Num(t, tick_decimals) + "</text>";
    }
    out += "<text class=\"axis-title\" x=\"" + C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) +
           "\" text-anchor=\"middle\">price level, " + HtmlEscape(ctx.root.reference_used) + " = 100</text>";
    for (int i = 0; i < n; ++i) {
      const int r = ctx.order[i];
      const double p = ctx.root.parity(r);
      const double y = top + row_h * i;
      const Rgb colour = scale.Colour(p);
      const double bx = std::min(x(100.0), x(p)), bw = std::max(1.0, std::abs(x(p) - x(100.0)));
      std::string tip = ctx.Label(r) + " (" + ctx.Code(r) + "): " + Num(p, kTableParityDecimals) + ", rank " +
                        std::to_string(i + 1);
      double l = kNaN, u = kNaN;
      const bool has_interval = Interval(ctx, r, &l, &u);
      if (has_interval) tip += ", interval " + Num(l, kTableParityDecimals) + "\xE2\x80\x93" + Num(u, kTableParityDecimals);
      out += "<g><title>" + HtmlEscape(tip) + "</title>";
      out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(y + row_h / 2 + 4) +
             "\" text-anchor=\"end\">" + HtmlEscape(Truncate(ctx.Label(r), max_chars)) + "</text>";
      out += "<rect class=\"pl-bar\" x=\"" + C(bx) + "\" y=\"" + C(y + 3) + "\" width=\"" + C(bw) + "\" height=\"" +
             C(row_h - 6) + "\" fill=\"" + Hex(colour) + "\"/>";
      double label_at = p;
      if (has_interval) {
        const double cy = y + row_h / 2;
        const std::string d = "M" + C(x(l)) + " " + C(cy) + "H" + C(x(u)) + "M" + C(x(l)) + " " + C(cy - 4) + "V" +
                              C(cy + 4) + "M" + C(x(u)) + " " + C(cy - 4) + "V" + C(cy + 4);
        // A light halo keeps the whisker visible on dark bars.
        out += "<path class=\"halo\" d=\"" + d + "\"/><path class=\"whisker\" d=\"" + d + "\"/>";
        label_at = p >= 100 ? std::max(p, u) : std::min(p, l);
      }
      const bool right = p >= 100.0;
      out += "<text class=\"value\" x=\"" + C(x(label_at) + (right ? 4 : -4)) + "\" y=\"" + C(y + row_h / 2 + 4) +
             "\" text-anchor=\"" + (right ? "start" : "end") + "\">" + Num(p, kChartParityDecimals) + "</text></g>";
    }
    out += "<line class=\"reference\" x1=\"" + C(x(100)) + "\" x2=\"" + C(x(100)) + "\" y1=\"" + C(top - 10) +
           "\" y2=\"" + C(top + row_h * n) + "\"/><text class=\"tick\" x=\"" + C(x(100)) + "\" y=\"" + C(top - 14) +
           "\" text-anchor=\"middle\">100 = " + HtmlEscape(ctx.root.reference_used) + "</text>";
    out += "</svg>\n";
  } else {
    // One thin column per region in rank order: the profile stays legible
    // at any number of regions; the table below names each one.
    const double left = 56.0, right = 16.0, top = 28.0, plot_h = 300.0;
    const double height = top + plot_h + 46.0;
    const double col_w = (kChartWidth - left - right) / n;
    auto y = [&](double v) { return top + (hi - v) / (hi - lo) * plot_h; };
    out += "<svg class=\"chart\" id=\"price-level-chart\" viewBox=\"0 0 " + C(kChartWidth) + " " + C(height) +
           "\" role=\"img\" aria-label=\"price level of each region by rank\">";
    for (double t : ticks) {
      out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) + "\" y1=\"" + C(y(t)) +
             "\" y2=\"" + C(y(t)) + "\"/><text class=\"tick\" x=\"" + C(left - 6) + "\" y=\"" + C(y(t) + 4) +
             "\" text-anchor=\"end\">" + Num(t, tick_decimals) + "</text>";
    }
    for (int i = 0; i < n; ++i) {
      const int r = ctx.order[i];
      const double p = ctx.root.parity(r);
      const double top_y = std::min(y(p), y(100.0)), h = std::max(0.5, std::abs(y(p) - y(100.0)));
      out += "<rect class=\"pl-bar compact\" x=\"" + C(left + col_w * i) + "\" y=\"" + C(top_y) + "\" width=\"" +
             FormatFixed(std::max(col_w, 0.6), 2) + "\" height=\"" + C(h) + "\" fill=\"" + Hex(scale.Colour(p)) +
             "\"><title>" + HtmlEscape(ctx.Label(r) + " (" + ctx.Code(r) + "): " + Num(p, kTableParityDecimals)) +
             "</title></rect>";
      double l, u;
      if (Interval(ctx, r, &l, &u)) {
        const double cx = left + col_w * (i + 0.5);
        out += "<line class=\"whisker thin\" x1=\"" + C(cx) + "\" x2=\"" + C(cx) + "\" y1=\"" + C(y(u)) + "\" y2=\"" +
               C(y(l)) + "\"/>";
      }
    }
    out += "<line class=\"reference\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) + "\" y1=\"" +
           C(y(100)) + "\" y2=\"" + C(y(100)) + "\"/>";
    const std::vector<double> rank_ticks = NiceTicks(1, n, 10);
    for (double t : rank_ticks) {
      if (t < 1) continue;
      const double cx = left + col_w * (t - 0.5);
      out += "<text class=\"tick\" x=\"" + C(cx) + "\" y=\"" + C(top + plot_h + 16) + "\" text-anchor=\"middle\">" +
             Num(t, 0) + "</text>";
    }
    out += "<text class=\"axis-title\" x=\"" + C((left + kChartWidth - right) / 2) + "\" y=\"" + C(height - 6) +
           "\" text-anchor=\"middle\">rank (1 = dearest); one column per region</text>";
    out += "<text class=\"axis-title\" transform=\"translate(14 " + C(top + plot_h / 2) +
           ") rotate(-90)\" text-anchor=\"middle\">price level, " + HtmlEscape(ctx.root.reference_used) +
           " = 100</text>";
    const int dear = ctx.order.front(), cheap = ctx.order.back();
    out += "<text class=\"value\" x=\"" + C(left + 8) + "\" y=\"" + C(top - 10) + "\">dearest: " +
           HtmlEscape(Truncate(ctx.Label(dear), 40)) + " " + Num(ctx.root.parity(dear), kChartParityDecimals) +
           "</text><text class=\"value\" x=\"" + C(kChartWidth - right - 4) + "\" y=\"" + C(top + plot_h - 6) +
           "\" text-anchor=\"end\">cheapest: " + HtmlEscape(Truncate(ctx.Label(cheap), 40)) + " " +
           Num(ctx.root.parity(cheap), kChartParityDecimals) + "</text>";
    out += "</svg>\n";
  }
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-price-level");
  if (any_interval) {
    out += "<span class=\"key\"><svg width=\"34\" height=\"12\"><path class=\"whisker key-mark\" d=\"M2 6H32M2 2V10M32 2V10\"/>"
           "</svg> " + HtmlEscape(ctx.in.sensitivity->interval_label) + "</span>";
  }
  out += "</div>\n";
  return out;
}

std::string PriceLevelTable(const Context& ctx, const std::vector<RegionSpread>& spreads) {
  const bool names = ctx.HasNames();
  bool intervals = false;
  for (int r : ctx.order) {
    double l, u;
    intervals = intervals || Interval(ctx, r, &l, &u);
  }
  const bool per_capita = ctx.root.real_per_capita_index.size() > 0 &&
                          ctx.root.real_per_capita_index.array().isFinite().any();
  std::string out = "<div class=\"table-scroll" + std::string(ctx.order.size() > 40 ? " tall" : "") +
                    "\"><table class=\"data sortable\" id=\"price-level-table\"><thead><tr>"
                    "<th class=\"num\">rank</th><th>region</th>";
  if (names) out += "<th>name</th>";
  out += "<th class=\"num\">price level</th>";
  if (intervals) out += "<th class=\"num\">lower</th><th class=\"num\">upper</th>";
  if (per_capita) out += "<th class=\"num\" title=\"real expenditure per head, whole country = 100\">real per head</th>";
  out += "<th class=\"num\">headings</th>";
  if (!spreads.empty()) {
    out += "<th class=\"num\" title=\"median over partners of 100 |ln(Laspeyres / Paasche)|\">median P\xE2\x80\x93L "
           "spread, %</th><th class=\"num\">largest, %</th><th>with</th>";
  }
  out += "</tr></thead><tbody>";
  auto num_cell = [](double v, int decimals) {
    return "<td class=\"num\" data-v=\"" + (std::isfinite(v) ? FormatFixed(v, 6) : std::string()) + "\">" +
           Num(v, decimals) + "</td>";
  };
  for (size_t i = 0; i < ctx.order.size(); ++i) {
    const int r = ctx.order[i];
    out += "<tr>" + num_cell(static_cast<double>(i + 1), 0) + "<td>" + HtmlEscape(ctx.Code(r)) + "</td>";
    if (names) out += "<td>" + HtmlEscape(r < static_cast<int>(ctx.survey.region_name.size()) ? ctx.survey.region_name[r] : "") + "</td>";
    out += num_cell(ctx.root.parity(r), kTableParityDecimals);
    if (intervals) {
      double l = kNaN, u = kNaN;
      Interval(ctx, r, &l, &u);
      out += num_cell(l, kTableParityDecimals) + num_cell(u, kTableParityDecimals);
    }
    if (per_capita) out += num_cell(ctx.root.real_per_capita_index(r), 1);
    out += num_cell(ctx.root.num_headings.size() > r ? ctx.root.num_headings(r) : kNaN, 0);
    if (!spreads.empty()) {
      const RegionSpread& s = spreads[r];
      out += num_cell(100.0 * s.median, 2) + num_cell(100.0 * s.max, 2) + "<td>" +
             (s.worst_partner >= 0 ? HtmlEscape(ctx.Code(s.worst_partner)) : std::string()) + "</td>";
    }
    out += "</tr>";
  }
  out += "</tbody></table></div>\n<p class=\"note\">Click a column heading to sort. Parities in full precision "
         "are in <code>parities.csv</code>.</p>\n";
  return out;
}

// The nodes shown against regions: the root, then its children (by
// expenditure when there are too many to show).
std::vector<int> AggregateColumns(const Context& ctx) {
  constexpr size_t kMaxColumns = 24;
  const ClassificationNode& root = ctx.survey.classification.nodes().front();
  std::vector<int> children = root.children;
  if (children.size() > kMaxColumns) {
    std::vector<double> total(ctx.result.nodes.size(), 0.0);
    for (int c : children) {
      const Eigen::VectorXd& e = ctx.result.nodes[c].expenditure;
      for (int r = 0; r < e.size(); ++r) total[c] += std::isfinite(e(r)) ? e(r) : 0.0;
    }
    std::stable_sort(children.begin(), children.end(), [&](int a, int b) { return total[a] > total[b]; });
    children.resize(kMaxColumns);
    std::sort(children.begin(), children.end());
  }
  std::vector<int> columns = {0};
  columns.insert(columns.end(), children.begin(), children.end());
  return columns;
}

// A region x column grid of coloured cells with optional values.
struct GridSpec {
  std::string id;
  std::string aria;
  std::vector<std::string> row_labels;
  std::vector<std::string> row_tips;
  std::vector<std::string> column_labels;
  std::vector<bool> column_bold;
  // values[row][column], NaN = no value (hatched).
  std::vector<std::vector<double>> values;
  std::function<Rgb(double)> colour;
  std::function<std::string(double)> format;
  std::function<std::string(int, int, double)> tip;
  double max_cell_w = 64.0;
  // Extra gap before these columns (separates summary columns).
  std::set<int> gap_before;
};

std::string Grid(const GridSpec& g) {
  const int rows = static_cast<int>(g.values.size());
  const int cols = static_cast<int>(g.column_labels.size());
  size_t max_chars = 4;
  for (const std::string& l : g.row_labels) max_chars = std::max(max_chars, CodePoints(l));
  max_chars = std::min<size_t>(max_chars, 28);
  const double label_w = 14.0 + 6.4 * static_cast<double>(max_chars);
  const double gap = 8.0 * static_cast<double>(g.gap_before.size());
  const double cell_w = std::clamp((kChartWidth - label_w - 16.0 - gap) / std::max(1, cols), 6.0, g.max_cell_w);
  const double cell_h = rows <= 30 ? std::min(22.0, std::max(cell_w * 0.62, 14.0)) : std::max(8.0, std::min(16.0, cell_w));
  size_t max_col_chars = 3;
  for (const std::string& l : g.column_labels) max_col_chars = std::max(max_col_chars, CodePoints(l));
  max_col_chars = std::min<size_t>(max_col_chars, 22);
  const bool rotate = cell_w < 6.6 * static_cast<double>(max_col_chars) + 6.0;
  const double header_h = rotate ? 12.0 + 4.6 * static_cast<double>(max_col_chars) : 22.0;
  // Rotated labels lean right past the last column: room for them.
  const double lean = rotate ? 4.6 * static_cast<double>(max_col_chars) * 0.64 + 6.0 : 8.0;
  const double width = label_w + 8.0 + gap + cell_w * cols + lean;
  const double height = header_h + cell_h * rows + 6.0;
  const bool labels = cell_w >= 34.0 && cell_h >= 13.0;
  auto col_x = [&](int c) {
    double extra = 0.0;
    for (int b : g.gap_before) extra += c >= b ? 8.0 : 0.0;
    return label_w + 8.0 + extra + cell_w * c;
  };
  std::string out = "<svg class=\"chart grid-chart\" id=\"" + g.id + "\" viewBox=\"0 0 " + C(width) + " " + C(height) +
                    "\" style=\"max-width:" + C(width) + "px\" role=\"img\" aria-label=\"" + HtmlEscape(g.aria) + "\">";
  for (int c = 0; c < cols; ++c) {
    const double cx = col_x(c) + cell_w / 2;
    const std::string label = HtmlEscape(Truncate(g.column_labels[c], max_col_chars));
    const std::string cls = g.column_bold[c] ? "col-label strong" : "col-label";
    if (rotate) {
      out += "<text class=\"" + cls + "\" transform=\"translate(" + C(cx + 3) + " " + C(header_h - 4) +
             ") rotate(-50)\">" + label + "</text>";
    } else {
      out += "<text class=\"" + cls + "\" x=\"" + C(cx) + "\" y=\"" + C(header_h - 7) + "\" text-anchor=\"middle\">" +
             label + "</text>";
    }
  }
  for (int r = 0; r < rows; ++r) {
    const double y = header_h + cell_h * r;
    out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(y + cell_h / 2 + 4) + "\" text-anchor=\"end\">";
    if (!g.row_tips.empty()) out += "<title>" + HtmlEscape(g.row_tips[r]) + "</title>";
    out += HtmlEscape(Truncate(g.row_labels[r], max_chars)) + "</text>";
    for (int c = 0; c < cols; ++c) {
      const double v = g.values[r][c];
      const double x = col_x(c);
      const std::string tip = "<title>" + HtmlEscape(g.tip(r, c, v)) + "</title>";
      if (!std::isfinite(v)) {
        out += "<rect class=\"cell none\" x=\"" + C(x) + "\" y=\"" + C(y) + "\" width=\"" + C(cell_w) + "\" height=\"" +
               C(cell_h) + "\">" + tip + "</rect>";
        continue;
      }
      const Rgb colour = g.colour(v);
      out += "<rect class=\"cell\" x=\"" + C(x) + "\" y=\"" + C(y) + "\" width=\"" + C(cell_w) + "\" height=\"" +
             C(cell_h) + "\" fill=\"" + Hex(colour) + "\">" + tip + "</rect>";
      if (labels) {
        out += "<text class=\"cell-value" + std::string(WantsDarkText(colour) ? "" : " on-dark") + "\" x=\"" +
               C(x + cell_w / 2) + "\" y=\"" + C(y + cell_h / 2 + 3.5) + "\" text-anchor=\"middle\">" + g.format(v) +
               "</text>";
      }
    }
  }
  return out + "</svg>\n";
}

std::string AggregateSection(const Context& ctx) {
  const std::vector<int> columns = AggregateColumns(ctx);
  const std::vector<int> rows = EveryKth(ctx.order, kReportMaxGridRegions);
  GridSpec g;
  g.id = "aggregate-grid";
  g.aria = "price level of each region in each aggregate";
  for (int node : columns) {
    g.column_labels.push_back(ctx.survey.classification.nodes()[node].code);
    g.column_bold.push_back(node == 0);
  }
  for (int r : rows) {
    g.row_labels.push_back(ctx.Label(r));
    g.row_tips.push_back(ctx.Label(r) + " (" + ctx.Code(r) + ")");
    std::vector<double> line;
    for (int node : columns) {
      const double p = ctx.result.nodes[node].parity(r);
      line.push_back(p);
    }
    g.values.push_back(line);
  }
  const DivergingScale scale = GridScale(g.values);
  g.colour = [scale](double v) { return scale.Colour(v); };
  g.format = [](double v) { return Num(v, kChartParityDecimals); };
  g.tip = [&ctx, &rows, &columns](int r, int c, double v) {
    return ctx.Label(rows[r]) + " \xC2\xB7 " + ctx.survey.classification.nodes()[columns[c]].code + ": " +
           Num(v, kTableParityDecimals);
  };
  g.gap_before = {1};
  std::string out = OpenSection("aggregates", "Price levels by aggregate");
  out += "<p>Price level of each region in <b>" + HtmlEscape(ctx.root_code) +
         "</b> (first column) and in each of its aggregates, each normalised on its own (" +
         HtmlEscape(ctx.root.reference_used) +
         " = 100). Read along a row to see which categories make a region dear or cheap.</p>\n";
  if (ctx.survey.classification.nodes().front().children.size() + 1 > columns.size()) {
    out += "<p class=\"note\">The " + FormatCount(static_cast<int64_t>(columns.size() - 1)) +
           " aggregates with the largest expenditure are shown; every node is in <code>parities.csv</code>.</p>";
  }
  out += Grid(g);
  out += ThinningNote(ctx, rows.size(), "Every region and node is in <code>parities.csv</code>.");
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-aggregates") +
         "<span class=\"key\"><svg width=\"16\" height=\"12\"><rect class=\"cell none\" width=\"16\" height=\"12\"/></svg> "
         "no price level</span></div>\n";
  return out + "</section>\n";
}

std::string MatrixSection(const Context& ctx) {
  const std::vector<int> regions = EveryKth(ctx.order, kReportMaxGridRegions);
  GridSpec g;
  g.id = "matrix-grid";
  g.aria = "parity matrix of the root: cost in the column region of what costs 100 in the row region";
  for (int b : regions) {
    g.column_labels.push_back(ctx.Code(b));
    g.column_bold.push_back(false);
  }
  for (int a : regions) {
    g.row_labels.push_back(ctx.Code(a));
    g.row_tips.push_back(ctx.Label(a));
    std::vector<double> line;
    for (int b : regions) {
      const double v = 100.0 * ctx.root.parity(b) / ctx.root.parity(a);
      line.push_back(v);
    }
    g.values.push_back(line);
  }
  const DivergingScale scale = GridScale(g.values);
  g.colour = [scale](double v) { return scale.Colour(v); };
  g.format = [](double v) { return Num(v, kChartParityDecimals); };
  g.tip = [&ctx, &regions](int r, int c, double v) {
    return "what costs 100 in " + ctx.Code(regions[r]) + " costs " + Num(v, kTableParityDecimals) + " in " +
           ctx.Code(regions[c]);
  };
  g.max_cell_w = 54.0;
  std::string out = OpenSection("matrix", "Parity matrix");
  out += "<p>Cell (row <i>a</i>, column <i>b</i>) is 100 \xC3\x97 P<sub>b</sub> / P<sub>a</sub> for <b>" +
         HtmlEscape(ctx.root_code) +
         "</b>: what costs 100 in the row region costs this much in the column region. Regions are in price-level "
         "order, dearest first; the matrix is transitive, so each row is the price-level chart seen from one "
         "region.</p>\n";
  out += Grid(g);
  out += ThinningNote(ctx, regions.size(), "The full matrix is in <code>matrix/</code>.");
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-matrix") + "</div>\n";
  return out + "</section>\n";
}

std::string CoverageSection(const Context& ctx) {
  const Survey& s = ctx.survey;
  // Columns: regions in price-level order (regions without a parity at the
  // end), binned into at most kReportMaxGridRegions groups of consecutive
  // ranks.
  std::vector<int> regions = ctx.order;
  regions.insert(regions.end(), ctx.missing.begin(), ctx.missing.end());
  const int n = static_cast<int>(regions.size());
  const int num_bins = std::min(n, kReportMaxGridRegions);
  std::vector<std::vector<int>> bins(num_bins);
  for (int i = 0; i < n; ++i) bins[static_cast<size_t>(static_cast<int64_t>(i) * num_bins / n)].push_back(regions[i]);
  const bool binned = num_bins < n;

  // Items priced per region x heading, from the cell table.
  std::vector<std::vector<int>> priced(s.num_headings(), std::vector<int>(s.num_regions(), 0));
  for (int h = 0; h < s.num_headings(); ++h) {
    const HeadingRange& range = s.heading_range[h];
    for (int64_t c = range.cell_begin; c < range.cell_end; ++c) ++priced[h][s.cells.region[c]];
  }
  GridSpec g;
  g.id = "coverage-grid";
  g.aria = "share of each heading's items priced in each region";
  for (const std::vector<int>& bin : bins) {
    if (!binned) {
      g.column_labels.push_back(ctx.Code(bin.front()));
    } else {
      // Binned columns are named by the ranks they hold.
      int begin = 1;
      for (const std::vector<int>* b = bins.data(); b != &bin; ++b) begin += static_cast<int>(b->size());
      const int end = begin + static_cast<int>(bin.size()) - 1;
      g.column_labels.push_back(begin == end ? std::to_string(begin)
                                             : std::to_string(begin) + "\xE2\x80\x93" + std::to_string(end));
    }
    g.column_bold.push_back(false);
  }
  g.column_labels.push_back("all regions");
  g.column_bold.push_back(true);
  g.gap_before = {num_bins};
  int64_t total_priced = 0, total_possible = 0;
  for (int h = 0; h < s.num_headings(); ++h) {
    const int num_items = s.heading_range[h].num_items();
    g.row_labels.push_back(s.heading_codes[h]);
    g.row_tips.push_back(s.heading_codes[h] + ": " + FormatCount(num_items) + " items, " +
                         FormatCount(s.heading_range[h].num_cells()) + " cells");
    std::vector<double> line;
    int64_t heading_priced = 0;
    for (const std::vector<int>& bin : bins) {
      int64_t sum = 0;
      for (int r : bin) sum += priced[h][r];
      line.push_back(num_items > 0 ? static_cast<double>(sum) / (static_cast<double>(num_items) * bin.size()) : kNaN);
      heading_priced += sum;
    }
    line.push_back(num_items > 0 ? static_cast<double>(heading_priced) / (static_cast<double>(num_items) * n) : kNaN);
    total_priced += heading_priced;
    total_possible += static_cast<int64_t>(num_items) * n;
    g.values.push_back(line);
  }
  g.colour = [](double v) { return Interpolate(kSequentialStops, v); };
  g.format = [](double v) { return FormatFixed(100.0 * v, 0); };
  g.tip = [&g, &bins, &ctx, binned](int r, int c, double v) {
    std::string where = "all regions";
    if (c < static_cast<int>(bins.size())) {
      where = binned ? "ranks " + g.column_labels[c] + ", " + ctx.Code(bins[c].front()) + " to " +
                           ctx.Code(bins[c].back()) + " (" + std::to_string(bins[c].size()) + " regions)"
                     : ctx.Code(bins[c].front());
    }
    return g.row_labels[r] + " \xC2\xB7 " + where + ": " + Percent(v, 1) + " of items priced";
  };
  g.max_cell_w = 44.0;
  std::string out = OpenSection("coverage", "Coverage of the survey");
  out += "<p>Share of each basic heading's items that were priced in each region (percent; regions in price-level "
         "order, dearest first). Overall " +
         Percent(total_possible > 0 ? static_cast<double>(total_priced) / total_possible : kNaN, 1) +
         " of heading items were priced. Thin coverage makes a heading's parity rest on few items.</p>\n";
  out += Grid(g);
  if (binned) {
    out += "<p class=\"note\">" + FormatCount(n) + " regions in " + FormatCount(num_bins) +
           " columns of consecutive price-level ranks (1 = dearest; regions without a price level last); a column "
           "shows the mean share of its regions.</p>\n";
  }
  out += "<div class=\"legend-row\">" + SequentialLegend("legend-coverage") +
         "<span class=\"key\"><svg width=\"16\" height=\"12\"><rect class=\"cell none\" width=\"16\" height=\"12\"/></svg> "
         "heading lists no items</span></div>\n";
  return out + "</section>\n";
}

std::string SpreadSection(const Context& ctx, const BilateralMatrices& b) {
  const int n = static_cast<int>(b.laspeyres.rows());
  struct Pair {
    int a, b;
    double spread;
  };
  std::vector<Pair> pairs;
  for (int i = 0; i < n; ++i) {
    for (int j = i + 1; j < n; ++j) {
      const double s = std::abs(std::log(b.laspeyres(i, j) / b.paasche(i, j)));
      if (std::isfinite(s)) pairs.push_back({i, j, s});
    }
  }
  std::string out = OpenSection("spread", "Spread of the bilateral comparisons");
  out += "<p>For each pair of regions the Laspeyres index (basket of the first) and the Paasche index (basket of the "
         "second) bound the comparison; their gap, 100 \xC3\x97 |ln(L / P)|, shows how much the answer depends on "
         "whose basket is priced. Large gaps mean the two regions buy differently and price differently, and "
         "the choice of index formula matters for them.</p>\n";
  if (pairs.empty()) return out + "<p>No pair of regions shares a heading.</p></section>\n";
  std::vector<double> values;
  for (const Pair& p : pairs) values.push_back(100.0 * p.spread);
  std::vector<double> sorted = values;
  std::sort(sorted.begin(), sorted.end());
  const double median = sorted.size() % 2 ? sorted[sorted.size() / 2]
                                          : 0.5 * (sorted[sorted.size() / 2 - 1] + sorted[sorted.size() / 2]);
  const double p90 = sorted[static_cast<size_t>(0.9 * (sorted.size() - 1))];
  out += "<div class=\"cards\">" + Card(FormatCount(static_cast<int64_t>(pairs.size())), "pairs of regions") +
         Card(Num(median, 2) + "\xC2\xA0%", "median spread") + Card(Num(p90, 2) + "\xC2\xA0%", "90th percentile") +
         Card(Num(sorted.back(), 2) + "\xC2\xA0%", "largest spread") + "</div>\n";

  // Histogram of the spreads.
  const int num_bins = 24;
  const double top = std::max(sorted.back(), 1e-6) * 1.0001;
  std::vector<int> counts(num_bins, 0);
  for (double v : values) ++counts[std::min(num_bins - 1, static_cast<int>(v / top * num_bins))];
  const int max_count = *std::max_element(counts.begin(), counts.end());
  const double left = 60.0, right = 20.0, plot_top = 20.0, plot_h = 180.0;
  const double height = plot_top + plot_h + 44.0;
  const double bar_w = (kChartWidth - left - right) / num_bins;
  out += "<svg class=\"chart\" id=\"spread-histogram\" viewBox=\"0 0 " + C(kChartWidth) + " " + C(height) +
         "\" role=\"img\" aria-label=\"histogram of Paasche-Laspeyres spreads\">";
  for (double t : NiceTicks(0, max_count, 4)) {
    const double y = plot_top + plot_h - t / max_count * plot_h;
    out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) + "\" y1=\"" + C(y) +
           "\" y2=\"" + C(y) + "\"/><text class=\"tick\" x=\"" + C(left - 6) + "\" y=\"" + C(y + 4) +
           "\" text-anchor=\"end\">" + FormatCount(std::llround(t)) + "</text>";
  }
  for (int i = 0; i < num_bins; ++i) {
    const double h = static_cast<double>(counts[i]) / max_count * plot_h;
    const double lo = top * i / num_bins, hi = top * (i + 1) / num_bins;
    out += "<rect class=\"hist-bar\" x=\"" + C(left + bar_w * i + 1) + "\" y=\"" + C(plot_top + plot_h - h) +
           "\" width=\"" + C(bar_w - 2) + "\" height=\"" + C(h) + "\"><title>" + Num(lo, 2) + "\xE2\x80\x93" +
           Num(hi, 2) + " %: " + FormatCount(counts[i]) + " pairs</title></rect>";
    if (counts[i] > 0) {
      out += "<text class=\"tick\" x=\"" + C(left + bar_w * (i + 0.5)) + "\" y=\"" + C(plot_top + plot_h - h - 4) +
             "\" text-anchor=\"middle\">" + FormatCount(counts[i]) + "</text>";
    }
  }
  const std::vector<double> x_ticks = NiceTicks(0, top, 8);
  const int x_decimals = TickDecimals(x_ticks);
  for (double t : x_ticks) {
    const double x = left + t / top * (kChartWidth - left - right);
    out += "<text class=\"tick\" x=\"" + C(x) + "\" y=\"" + C(plot_top + plot_h + 16) + "\" text-anchor=\"middle\">" +
           Num(t, x_decimals) + "</text>";
  }
  out += "<line class=\"axis\" x1=\"" + C(left) + "\" x2=\"" + C(kChartWidth - right) + "\" y1=\"" +
         C(plot_top + plot_h) + "\" y2=\"" + C(plot_top + plot_h) + "\"/>";
  out += "<text class=\"axis-title\" x=\"" + C((left + kChartWidth - right) / 2) + "\" y=\"" + C(height - 6) +
         "\" text-anchor=\"middle\">spread 100 \xC3\x97 |ln(Laspeyres / Paasche)|, %; bars count pairs</text></svg>\n";

  // The worst pairs.
  constexpr size_t kWorstPairs = 12;
  const size_t k = std::min(kWorstPairs, pairs.size());
  std::partial_sort(pairs.begin(), pairs.begin() + k, pairs.end(), [](const Pair& x, const Pair& y) {
    return x.spread > y.spread || (x.spread == y.spread && (x.a < y.a || (x.a == y.a && x.b < y.b)));
  });
  out += "<h3>Pairs with the widest spread</h3><table class=\"data\" id=\"worst-pairs\"><thead><tr><th>region a</th>"
         "<th>region b</th><th class=\"num\">Laspeyres</th><th class=\"num\">Paasche</th><th class=\"num\">Fisher</th>"
         "<th class=\"num\">T\xC3\xB6rnqvist</th><th class=\"num\">spread, %</th><th class=\"num\">headings "
         "matched</th></tr></thead><tbody>";
  for (size_t i = 0; i < k; ++i) {
    const Pair& p = pairs[i];
    out += "<tr><td>" + HtmlEscape(ctx.Label(p.a)) + "</td><td>" + HtmlEscape(ctx.Label(p.b)) + "</td><td class=\"num\">" +
           Num(100.0 * b.laspeyres(p.a, p.b), kTableParityDecimals) + "</td><td class=\"num\">" +
           Num(100.0 * b.paasche(p.a, p.b), kTableParityDecimals) + "</td><td class=\"num\">" +
           Num(100.0 * b.fisher(p.a, p.b), kTableParityDecimals) + "</td><td class=\"num\">" +
           Num(100.0 * b.tornqvist(p.a, p.b), kTableParityDecimals) + "</td><td class=\"num\">" +
           Num(100.0 * p.spread, 2) + "</td><td class=\"num\">" +
           (b.num_matched.size() > 0 ? FormatCount(b.num_matched(p.a, p.b)) : std::string("\xE2\x80\x93")) + "</td></tr>";
  }
  out += "</tbody></table>\n<p class=\"note\">Indices compare region b with region a (a = 100). Every ordered pair "
         "is in <code>bilateral/</code>.</p>\n";
  return out + "</section>\n";
}

std::string OutlierSection(const Context& ctx, const std::vector<ReportOutlier>& outliers) {
  std::string out = OpenSection("outliers", "Flagged outliers");
  const std::string threshold =
      ctx.in.config != nullptr ? Num(ctx.in.config->outlier_threshold, 1) : std::string("the threshold");
  if (outliers.empty()) {
    return out + "<p>No cell's standardised residual exceeds " + threshold + " in absolute value.</p></section>\n";
  }
  std::vector<const ReportOutlier*> sorted;
  for (const ReportOutlier& o : outliers) sorted.push_back(&o);
  std::stable_sort(sorted.begin(), sorted.end(), [](const ReportOutlier* a, const ReportOutlier* b) {
    return std::abs(a->standardised_residual) > std::abs(b->standardised_residual);
  });
  // Counts per heading, largest first: where to look first.
  std::map<std::string, int> per_heading;
  for (const ReportOutlier& o : outliers) ++per_heading[o.heading];
  std::vector<std::pair<std::string, int>> headings(per_heading.begin(), per_heading.end());
  std::stable_sort(headings.begin(), headings.end(), [](const auto& a, const auto& b) { return a.second > b.second; });
  out += "<p>" + FormatCount(static_cast<int64_t>(outliers.size())) +
         " cells (region \xC3\x97 item) have a standardised residual beyond \xC2\xB1" + threshold +
         ": their price is far from what the region's level and the item's price predict. Check units, package "
         "sizes and decimal points before trusting them. Most flagged headings: ";
  for (size_t i = 0; i < headings.size() && i < 5; ++i) {
    out += (i ? ", " : "") + HtmlEscape(headings[i].first) + " (" + FormatCount(headings[i].second) + ")";
  }
  out += ".</p>\n";
  constexpr size_t kMaxRows = 50;
  out += "<div class=\"table-scroll\"><table class=\"data sortable\" id=\"outlier-table\"><thead><tr><th>heading</th>"
         "<th>region</th><th>item</th><th class=\"num\">observed</th><th class=\"num\">predicted</th>"
         "<th class=\"num\">ratio</th><th class=\"num\">std. residual</th><th class=\"num\">quotes</th></tr></thead><tbody>";
  for (size_t i = 0; i < sorted.size() && i < kMaxRows; ++i) {
    const ReportOutlier& o = *sorted[i];
    const double ratio = o.predicted > 0 ? o.observed / o.predicted : kNaN;
    out += "<tr><td>" + HtmlEscape(o.heading) + "</td><td>" + HtmlEscape(o.region) + "</td><td>" + HtmlEscape(o.item) +
           "</td><td class=\"num\" data-v=\"" + FormatFixed(o.observed, 6) + "\">" + Num(o.observed, 2) +
           "</td><td class=\"num\" data-v=\"" + FormatFixed(o.predicted, 6) + "\">" + Num(o.predicted, 2) +
           "</td><td class=\"num\" data-v=\"" + (std::isfinite(ratio) ? FormatFixed(ratio, 6) : "") + "\">" +
           Num(ratio, 2) + "</td><td class=\"num\" data-v=\"" + FormatFixed(o.standardised_residual, 6) + "\">" +
           Num(o.standardised_residual, 2) + "</td><td class=\"num\" data-v=\"" + std::to_string(o.num_quotes) +
           "\">" + FormatCount(o.num_quotes) + "</td></tr>";
  }
  out += "</tbody></table></div>\n";
  if (sorted.size() > kMaxRows) {
    out += "<p class=\"note\">The " + FormatCount(static_cast<int64_t>(kMaxRows)) + " largest of " +
           FormatCount(static_cast<int64_t>(sorted.size())) + " are shown.</p>\n";
  }
  return out + "</section>\n";
}

std::string CoverageCurveChart(const std::vector<ReportSensitivity::CoveragePoint>& points) {
  std::vector<ReportSensitivity::CoveragePoint> p = points;
  std::sort(p.begin(), p.end(), [](const auto& a, const auto& b) { return a.coverage_share < b.coverage_share; });
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
    out += "<line class=\"grid\" x1=\"" + C(left) + "\" x2=\"" + C(left + plot_w) + "\" y1=\"" + C(y(t)) + "\" y2=\"" +
           C(y(t)) + "\"/><text class=\"tick\" x=\"" + C(left - 6) + "\" y=\"" + C(y(t) + 4) +
           "\" text-anchor=\"end\">" + Num(t, TickDecimals(y_ticks)) + "</text>";
  }
  for (int t = 0; t <= 100; t += 20) {
    out += "<text class=\"tick\" x=\"" + C(x(t / 100.0)) + "\" y=\"" + C(top + plot_h + 16) +
           "\" text-anchor=\"middle\">" + std::to_string(t) + "</text>";
  }
  std::string path;
  for (const auto& q : p) path += (path.empty() ? "M" : "L") + C(x(q.coverage_share)) + " " + C(y(q.median_spread_pct));
  out += "<path class=\"line\" d=\"" + path + "\"/>";
  for (const auto& q : p) {
    out += "<circle class=\"dot\" cx=\"" + C(x(q.coverage_share)) + "\" cy=\"" + C(y(q.median_spread_pct)) +
           "\" r=\"3.5\"><title>" + Percent(q.coverage_share, 0) + " of items: " + Num(q.median_spread_pct, 2) +
           " %</title></circle>";
  }
  out += "<line class=\"axis\" x1=\"" + C(left) + "\" x2=\"" + C(left + plot_w) + "\" y1=\"" + C(top + plot_h) +
         "\" y2=\"" + C(top + plot_h) + "\"/>";
  out += "<text class=\"axis-title\" x=\"" + C(left + plot_w / 2) + "\" y=\"" + C(height - 6) +
         "\" text-anchor=\"middle\">share of each heading's items kept, %</text>";
  out += "<text class=\"axis-title\" transform=\"translate(14 " + C(top + plot_h / 2) +
         ") rotate(-90)\" text-anchor=\"middle\">median change, %</text></svg>\n";
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
  // Each method's price level as a difference from the main result, 100 x
  // ln(method / main) (about a percentage): the differences are small next
  // to the levels, and on a common zero they are visible at once. The rows
  // where the methods disagree most are shown when there are many.
  auto diff = [&](size_t m, int r) { return 100.0 * std::log(s.method_parity[m][r] / ctx.root.parity(r)); };
  struct Row {
    int region;
    double lo, hi;
  };
  std::vector<Row> rows;
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
  const size_t max_rows = 40;
  const bool cut = rows.size() > max_rows;
  if (cut) {
    std::stable_sort(rows.begin(), rows.end(), [](const Row& a, const Row& b) { return a.hi - a.lo > b.hi - b.lo; });
    rows.resize(max_rows);
    std::stable_sort(rows.begin(), rows.end(),
                     [&](const Row& a, const Row& b) { return ctx.position[a.region] < ctx.position[b.region]; });
  }
  double extent = 0.5;
  for (const Row& row : rows) extent = std::max({extent, -row.lo, row.hi});
  const double hi = extent * 1.1, lo = -hi;
  size_t max_chars = 6;
  for (const Row& row : rows) max_chars = std::max(max_chars, CodePoints(ctx.Label(row.region)));
  max_chars = std::min<size_t>(max_chars, 30);
  const double label_w = 18.0 + 6.6 * static_cast<double>(max_chars);
  const double row_h = 20.0, top = 10.0, x0 = label_w + 16.0, x1 = kChartWidth - 110.0;
  const double height = top + row_h * rows.size() + 40.0;
  auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
  // Shapes, not colours, tell the methods apart.
  auto marker = [](size_t k, double cx, double cy) -> std::string {
    switch (k % 4) {
      case 0:
        return "<circle class=\"marker\" cx=\"" + C(cx) + "\" cy=\"" + C(cy) + "\" r=\"4\"/>";
      case 1:
        return "<rect class=\"marker\" x=\"" + C(cx - 3.5) + "\" y=\"" + C(cy - 3.5) + "\" width=\"7\" height=\"7\"/>";
      case 2:
        return "<path class=\"marker\" d=\"M" + C(cx) + " " + C(cy - 5) + "L" + C(cx + 4.5) + " " + C(cy + 3.5) + "H" +
               C(cx - 4.5) + "Z\"/>";
      default:
        return "<path class=\"marker open\" d=\"M" + C(cx) + " " + C(cy - 5) + "L" + C(cx + 5) + " " + C(cy) + "L" +
               C(cx) + " " + C(cy + 5) + "L" + C(cx - 5) + " " + C(cy) + "Z\"/>";
    }
  };
  std::string out = "<svg class=\"chart\" id=\"method-spread\" viewBox=\"0 0 " + C(kChartWidth) + " " + C(height) +
                    "\" role=\"img\" aria-label=\"price level of each region under each method\">";
  const std::vector<double> ticks = NiceTicks(lo, hi, 8);
  for (double t : ticks) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top) + "\" y2=\"" +
           C(top + row_h * rows.size()) + "\"/><text class=\"tick\" x=\"" + C(x(t)) + "\" y=\"" +
           C(top + row_h * rows.size() + 16) + "\" text-anchor=\"middle\">" + Num(t, TickDecimals(ticks)) + "</text>";
  }
  for (size_t i = 0; i < rows.size(); ++i) {
    const Row& row = rows[i];
    const double cy = top + row_h * (i + 0.5);
    out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(cy + 4) + "\" text-anchor=\"end\">" +
           HtmlEscape(Truncate(ctx.Label(row.region), max_chars)) + "</text>";
    out += "<line class=\"range\" x1=\"" + C(x(row.lo)) + "\" x2=\"" + C(x(row.hi)) + "\" y1=\"" + C(cy) + "\" y2=\"" +
           C(cy) + "\"/>";
    for (size_t k = 0; k < methods.size(); ++k) {
      const double v = diff(methods[k], row.region);
      if (std::isfinite(v)) out += marker(k, x(v), cy);
    }
    out += "<text class=\"value\" x=\"" + C(x1 + 10) + "\" y=\"" + C(cy + 4) + "\">" + Num(row.hi - row.lo, 2) +
           "</text>";
  }
  out += "<line class=\"main-mark\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" + C(top - 4) + "\" y2=\"" +
         C(top + row_h * rows.size()) + "\"/>";
  out += "<text class=\"tick\" x=\"" + C(x1 + 10) + "\" y=\"" + C(top + row_h * rows.size() + 16) + "\">range</text>";
  out += "<text class=\"axis-title\" x=\"" + C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) +
         "\" text-anchor=\"middle\">difference from the main result, 100 \xC3\x97 ln(method / main), %</text></svg>\n";
  out += "<div class=\"legend-row\"><span class=\"key\"><svg width=\"14\" height=\"16\"><line class=\"main-mark\" "
         "x1=\"7\" x2=\"7\" y1=\"1\" y2=\"15\"/></svg> main result (0)</span>";
  for (size_t k = 0; k < methods.size(); ++k) {
    out += "<span class=\"key\"><svg width=\"14\" height=\"14\">" + marker(k, 7, 7) + "</svg> " +
           HtmlEscape(s.method_names[methods[k]]) + "</span>";
  }
  out += "</div>\n";
  if (cut) {
    out += "<p class=\"note\">The " + FormatCount(static_cast<int64_t>(max_rows)) +
           " regions where the methods disagree most are shown, in price-level order.</p>\n";
  }
  return out;
}

std::string SensitivitySection(const Context& ctx, const ReportSensitivity& s) {
  std::string out = OpenSection("sensitivity", "Sensitivity");
  bool any = false;
  if (!s.coverage_curve.empty()) {
    any = true;
    out += "<h3>Coverage curve</h3><p>The survey thinned to a share of each heading's items, and the median change of the "
           "regions' price levels for <b>" + HtmlEscape(ctx.root_code) +
           "</b> that follows. A curve that rises early means the parities lean on few prices.</p>\n" +
           CoverageCurveChart(s.coverage_curve);
  }
  const std::string methods = MethodSpreadChart(ctx, s);
  if (!methods.empty()) {
    any = true;
    out += "<h3>Method spread</h3><p>How far each alternative method moves each region's price level from the main "
           "result. Where the marks lie far from zero, the region's parity depends on the method chosen as much as "
           "on its prices.</p>\n" + methods;
  }
  if (!s.parity_lower.empty()) {
    any = true;
    out += "<p>The intervals drawn in <a href=\"#price-levels\">Price levels</a> are: " + HtmlEscape(s.interval_label) +
           ".</p>\n";
  }
  if (!any) out += "<p>The sensitivity run gave no results to show.</p>\n";
  return out + "</section>\n";
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

constexpr const char* kStyle = R"css(
:root{--ink:#1d2329;--muted:#5b6670;--rule:#d5dbe0;--bg:#ffffff;--panel:#f5f7f9;--accent:#14406b}
*{box-sizing:border-box}
html{font-size:15px}
body{margin:0;color:var(--ink);background:var(--bg);font-family:system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,"Liberation Sans",sans-serif;line-height:1.45;font-variant-numeric:tabular-nums}
header.top{background:var(--accent);color:#fff;padding:22px 0 18px}
header.top .wrap{display:flex;justify-content:space-between;align-items:flex-end;gap:16px;flex-wrap:wrap}
header.top h1{margin:0;font-size:1.7rem;font-weight:600;letter-spacing:.01em}
header.top .sub{opacity:.85;font-size:.93rem}
.wrap{max-width:1080px;margin:0 auto;padding:0 24px}
nav.toc{border-bottom:1px solid var(--rule);background:var(--panel);font-size:.9rem}
nav.toc .wrap{display:flex;flex-wrap:wrap;gap:4px 18px;padding-top:8px;padding-bottom:8px}
nav.toc a{color:var(--accent);text-decoration:none}
nav.toc a:hover{text-decoration:underline}
section{padding:10px 0 18px;border-bottom:1px solid var(--rule)}
section:last-of-type{border-bottom:0}
h2{font-size:1.3rem;margin:18px 0 8px;color:var(--accent);font-weight:600}
h3{font-size:1.02rem;margin:18px 0 6px}
p{margin:6px 0 10px;max-width:78ch}
p.lead{font-size:1.05rem}
p.note{color:var(--muted);font-size:.87rem}
code{font-family:ui-monospace,"DejaVu Sans Mono","Liberation Mono",monospace;font-size:.86em;overflow-wrap:anywhere}
.cards{display:flex;flex-wrap:wrap;gap:10px;margin:10px 0 14px}
.card{background:var(--panel);border:1px solid var(--rule);border-radius:6px;padding:8px 14px;min-width:112px}
.card .value{font-size:1.35rem;font-weight:600}
.card .label{font-size:.8rem;color:var(--muted)}
table{border-collapse:collapse;font-size:.88rem}
table.facts th{text-align:left;font-weight:600;padding:3px 18px 3px 0;color:var(--muted);vertical-align:top}
table.facts td{padding:3px 0}
table.data{margin:6px 0;min-width:50%}
table.data th,table.data td{padding:4px 10px;border-bottom:1px solid var(--rule);text-align:left;white-space:nowrap}
table.data thead th{background:var(--panel);border-bottom:2px solid #b9c2ca;font-weight:600;position:sticky;top:0}
table.data .num{text-align:right}
table.sortable thead th{cursor:pointer}
table.sortable thead th[aria-sort=ascending]::after{content:" \25B2";font-size:.7em}
table.sortable thead th[aria-sort=descending]::after{content:" \25BC";font-size:.7em}
.table-scroll{overflow:auto;max-width:100%}
.table-scroll.tall{max-height:640px;border:1px solid var(--rule)}
ul.warnings li{color:#7a3b00}
svg.chart{display:block;width:100%;height:auto;margin:8px 0}
svg text{font-family:inherit;font-size:12px;fill:var(--ink)}
svg .tick{font-size:11px;fill:var(--muted)}
svg .axis-title{font-size:12px;fill:var(--muted)}
svg .row-label{font-size:12px}
svg .col-label{font-size:11.5px}
svg .strong{font-weight:700}
svg .value{font-size:11.5px}
svg .muted{fill:var(--muted)}
svg .grid{stroke:#e3e7eb;stroke-width:1}
svg .axis{stroke:#8a949c;stroke-width:1}
svg .reference{stroke:#1d2329;stroke-width:1.2;stroke-dasharray:4 3}
svg .pl-bar{stroke:rgba(0,0,0,.45);stroke-width:.6}
svg .pl-bar.compact{stroke:none}
svg .whisker{stroke:#1d2329;stroke-width:1.3;fill:none}
svg .halo{stroke:#fff;stroke-width:3.2;fill:none;opacity:.85}
svg .whisker.thin{stroke-width:.6;opacity:.6}
svg .cell{stroke:#fff;stroke-width:1}
svg .cell.none{fill:#fff;stroke:#c8cfd5;stroke-dasharray:2 2}
svg .cell-value{font-size:10.5px;fill:#111}
svg .cell-value.on-dark{fill:#fff}
svg .hist-bar{fill:#3b6f9e}
svg .line{fill:none;stroke:#14406b;stroke-width:2}
svg .dot{fill:#14406b}
svg .range{stroke:#9aa5ae;stroke-width:3;stroke-linecap:round}
svg .main-mark{stroke:#1d2329;stroke-width:2}
svg .marker{fill:#14406b;stroke:#fff;stroke-width:.8}
svg .marker.open{fill:#fff;stroke:#14406b;stroke-width:1.5}
svg.grid-chart{width:100%}
.legend-row{display:flex;flex-wrap:wrap;align-items:center;gap:6px 22px;margin:4px 0 6px;font-size:.85rem;color:var(--muted)}
.legend-row .key{display:inline-flex;align-items:center;gap:6px}
svg.legend text{font-size:11px}
dl.methods dt{font-weight:600;margin-top:10px}
dl.methods dd{margin:2px 0 4px 0;max-width:84ch}
ul.cautions li{margin:4px 0;max-width:84ch}
footer{color:var(--muted);font-size:.82rem;padding:14px 0 30px}
@media print{
  html{font-size:12px}
  header.top{background:none;color:var(--ink);border-bottom:2px solid var(--ink);padding:0 0 8px}
  nav.toc{display:none}
  .table-scroll.tall{max-height:none;overflow:visible;border:0}
  table.data thead th{position:static}
  section{break-inside:auto}
  svg.chart,h2,h3{break-inside:avoid;break-after:avoid-page}
  a{color:inherit;text-decoration:none}
}
)css";

// Sorts tables by clicking headings; marks the page ready (the browser test
// reads the mark) and records script errors as an attribute, so a failure
// is visible without a console.
constexpr const char* kScript = R"js(
(function(){
  var root=document.documentElement;
  window.addEventListener('error',function(e){root.setAttribute('data-report-error',String(e.message))});
  function key(cell){var v=cell.getAttribute('data-v');if(v===null)return cell.textContent.trim().toLowerCase();return v===''?NaN:parseFloat(v);}
  Array.prototype.forEach.call(document.querySelectorAll('table.sortable'),function(table){
    var heads=table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads,function(th,col){
      th.tabIndex=0;
      function sort(){
        var asc=th.getAttribute('aria-sort')!=='ascending';
        Array.prototype.forEach.call(heads,function(h){h.removeAttribute('aria-sort')});
        th.setAttribute('aria-sort',asc?'ascending':'descending');
        var body=table.tBodies[0],rows=Array.prototype.slice.call(body.rows);
        rows.sort(function(a,b){
          var x=key(a.cells[col]),y=key(b.cells[col]);
          if(typeof x==='number'){if(isNaN(x))return isNaN(y)?0:1;if(isNaN(y))return -1;return asc?x-y:y-x;}
          return asc?x.localeCompare(y):y.localeCompare(x);
        });
        rows.forEach(function(r){body.appendChild(r)});
      }
      th.addEventListener('click',sort);
      th.addEventListener('keydown',function(e){if(e.key==='Enter'||e.key===' '){e.preventDefault();sort();}});
    });
  });
  root.setAttribute('data-report-ready','1');
})();
)js";

}  // namespace

std::vector<ReportOutlier> ToReportOutliers(const Survey& survey, const OutlierReport& report) {
  std::vector<ReportOutlier> rows;
  for (const Outlier& o : report.outliers) {
    ReportOutlier row;
    row.heading = survey.heading_codes[o.heading];
    row.region = std::string(survey.regions.Code(o.region));
    row.item = std::string(survey.items.Code(o.item));
    if (o.kind == OutlierKind::kLowestQuote) row.item += " (lowest quote)";
    if (o.kind == OutlierKind::kHighestQuote) row.item += " (highest quote)";
    row.observed = o.observed;
    row.predicted = o.predicted;
    row.standardised_residual = o.standardised_residual;
    row.num_quotes = o.num_quotes;
    rows.push_back(std::move(row));
  }
  return rows;
}

std::string HtmlEscape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

std::string ReportHtml(const ReportInputs& inputs) {
  const bool usable = inputs.survey != nullptr && inputs.result != nullptr && !inputs.result->nodes.empty() &&
                      !inputs.survey->classification.empty();
  std::string root_code = usable ? inputs.survey->classification.nodes().front().code : std::string();
  std::string out = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                    "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
                    "<meta name=\"generator\" content=\"paritas " PARITAS_VERSION "\">"
                    "<title>Regional price levels" +
                    (usable ? " \xE2\x80\x94 " + HtmlEscape(root_code) : std::string()) + "</title><style>" + kStyle +
                    "</style></head><body>\n";
  std::string subtitle = "paritas " PARITAS_VERSION;
  if (usable) {
    subtitle = FormatCount(inputs.survey->num_regions()) + " regions \xC2\xB7 " + FormatCount(inputs.survey->num_headings()) +
               " basic headings \xC2\xB7 reference " + HtmlEscape(inputs.result->nodes.front().reference_used) +
               " = 100 \xC2\xB7 " + subtitle;
  }
  out += "<header class=\"top\"><div class=\"wrap\"><h1>Regional price levels" +
         (usable ? ": " + HtmlEscape(root_code) : std::string()) + "</h1><div class=\"sub\">" + subtitle +
         "</div></div></header>\n";
  if (!usable) {
    return out + "<main class=\"wrap\"><section id=\"overview\"><h2>Overview</h2><p>No parities were computed, so "
                 "there is nothing to show.</p></section></main></body></html>\n";
  }

  const Survey& survey = *inputs.survey;
  const ParityResult& result = *inputs.result;
  Context ctx{inputs, survey, result, result.nodes.front(), root_code, {}, {}, {}};
  ctx.position.assign(survey.num_regions(), -1);
  for (int r = 0; r < survey.num_regions(); ++r) {
    const double p = r < ctx.root.parity.size() ? ctx.root.parity(r) : kNaN;
    (std::isfinite(p) && p > 0 ? ctx.order : ctx.missing).push_back(r);
  }
  std::stable_sort(ctx.order.begin(), ctx.order.end(),
                   [&](int a, int b) { return ctx.root.parity(a) > ctx.root.parity(b); });
  for (size_t i = 0; i < ctx.order.size(); ++i) ctx.position[ctx.order[i]] = static_cast<int>(i);

  const bool has_bilaterals = !result.bilaterals.empty() && result.bilaterals.front().laspeyres.rows() ==
                                                                 survey.num_regions();
  const bool has_outliers = inputs.outliers != nullptr;
  const bool has_sensitivity = inputs.sensitivity != nullptr;

  out += "<nav class=\"toc\" aria-label=\"sections\"><div class=\"wrap\"><a href=\"#overview\">Overview</a>"
         "<a href=\"#price-levels\">Price levels</a><a href=\"#aggregates\">By aggregate</a>"
         "<a href=\"#matrix\">Parity matrix</a><a href=\"#coverage\">Coverage</a>";
  if (has_bilaterals) out += "<a href=\"#spread\">Bilateral spread</a>";
  if (has_outliers) out += "<a href=\"#outliers\">Outliers</a>";
  if (has_sensitivity) out += "<a href=\"#sensitivity\">Sensitivity</a>";
  out += "<a href=\"#methods\">Methods</a><a href=\"#cautions\">Cautions</a></div></nav>\n<main class=\"wrap\">\n";

  out += Overview(ctx);
  std::vector<RegionSpread> spreads;
  if (has_bilaterals) spreads = RegionSpreads(result.bilaterals.front());
  if (!ctx.order.empty()) {
    double max_ratio = 1.0;
    for (int r : ctx.order) max_ratio = std::max(max_ratio, FoldedRatio(ctx.root.parity(r)));
    out += OpenSection("price-levels", "Price levels");
    out += "<p>Price level of every region for <b>" + HtmlEscape(root_code) + "</b>, dearest first (" +
           HtmlEscape(ctx.root.reference_used) + " = 100). A bar runs from 100 to the region's level" +
           std::string(has_sensitivity && !inputs.sensitivity->parity_lower.empty()
                           ? "; whiskers show the interval from the sensitivity run."
                           : ". The aggregate has no standard error of its own; see the cautions on sampling error.") +
           "</p>\n";
    out += PriceLevelChart(ctx, MakeDivergingScale(max_ratio));
    out += PriceLevelTable(ctx, spreads);
    out += "</section>\n";
    out += AggregateSection(ctx);
    out += MatrixSection(ctx);
  }
  out += CoverageSection(ctx);
  if (has_bilaterals) out += SpreadSection(ctx, result.bilaterals.front());
  if (has_outliers) out += OutlierSection(ctx, *inputs.outliers);
  if (has_sensitivity) out += SensitivitySection(ctx, *inputs.sensitivity);
  out += MethodsSection(ctx);
  out += CautionsSection();
  out += "</main>\n<footer><div class=\"wrap\">Made by paritas " PARITAS_VERSION
         ". Full results: <code>parities.csv</code>, <code>matrix/</code>, <code>bilateral/</code>, "
         "<code>run.json</code>.</div></footer>\n<script>";
  out += kScript;
  out += "</script>\n</body></html>\n";
  return out;
}

}  // namespace paritas
