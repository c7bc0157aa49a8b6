// Number formats, colour scales, axis ticks, legends and the small pieces
// every section of the report is built from. One rule per kind of number, so
// a parity reads the same in every chart and table.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {

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
  DivergingScale scale =
      MakeDivergingScale(ratios[static_cast<size_t>(0.95 * (ratios.size() - 1))]);
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
  std::string out =
      "<svg class=\"legend\" viewBox=\"0 0 360 40\" width=\"360\" height=\"40\" role=\"img\" "
      "aria-label=\"colour scale of price levels\"><defs><linearGradient id=\"" +
      id + "\">";
  for (int i = 0; i <= 8; ++i) {
    out += "<stop offset=\"" + FormatFixed(i / 8.0, 3) + "\" stop-color=\"" +
           Hex(Interpolate(kDivergingStops, i / 8.0)) + "\"/>";
  }
  out += "</linearGradient></defs><rect x=\"60\" y=\"4\" width=\"240\" height=\"12\" fill=\"url(#" +
         id + ")\" stroke=\"#888\" stroke-width=\"0.5\"/>";
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
  std::string out =
      "<svg class=\"legend\" viewBox=\"0 0 360 40\" width=\"360\" height=\"40\" role=\"img\" "
      "aria-label=\"colour scale of coverage\"><defs><linearGradient id=\"" +
      id + "\">";
  for (int i = 0; i <= 6; ++i) {
    out += "<stop offset=\"" + FormatFixed(i / 6.0, 3) + "\" stop-color=\"" +
           Hex(Interpolate(kSequentialStops, i / 6.0)) + "\"/>";
  }
  out += "</linearGradient></defs><rect x=\"60\" y=\"4\" width=\"240\" height=\"12\" fill=\"url(#" +
         id + ")\" stroke=\"#888\" stroke-width=\"0.5\"/>";
  out += "<text x=\"60\" y=\"30\" text-anchor=\"middle\">0\xC2\xA0%</text>";
  out += "<text x=\"180\" y=\"30\" text-anchor=\"middle\">50\xC2\xA0%</text>";
  out += "<text x=\"300\" y=\"30\" text-anchor=\"middle\">100\xC2\xA0%</text>";
  out += "<text x=\"54\" y=\"14\" text-anchor=\"end\" class=\"muted\">none</text>";
  out += "<text x=\"306\" y=\"14\" class=\"muted\">all items</text></svg>";
  return out;
}

// Returns at most `max_count` of `order`, evenly spaced and keeping both
// ends, so a thinned grid still spans the dearest to the cheapest.
std::vector<int> EveryKth(const std::vector<int>& order, int max_count) {
  const int n = static_cast<int>(order.size());
  if (n <= max_count) return order;
  std::vector<int> out;
  for (int i = 0; i < max_count; ++i) {
    out.push_back(order[static_cast<size_t>(
        std::llround(static_cast<double>(i) * (n - 1) / (max_count - 1)))]);
  }
  out.erase(std::unique(out.begin(), out.end()), out.end());
  return out;
}

std::string WarningKindsOf(const Context& ctx, int node, int region) {
  const PlausibilityResult* p = ctx.in.plausibility;
  if (p == nullptr || node >= static_cast<int>(p->node_region_kinds.size())) return "";
  const std::string& kinds = p->node_region_kinds[node][region];
  std::string labels;
  for (size_t start = 0; start < kinds.size();) {
    const size_t end = std::min(kinds.find(';', start), kinds.size());
    labels += (labels.empty() ? "" : ", ") + WarningLabel(kinds.substr(start, end - start));
    start = end + 1;
  }
  return labels;
}

std::string WarningMark(const Context& ctx, int node, int region) {
  const std::string labels = WarningKindsOf(ctx, node, region);
  if (labels.empty()) return "";
  return " <a class=\"warn\" href=\"#warnings\" title=\"warnings: " + HtmlEscape(labels) +
         "\">&#9888;</a>";
}

std::string ThinningNote(const Context& ctx, size_t shown, const std::string& where) {
  if (shown >= ctx.order.size()) return "";
  return "<p class=\"note\">" + FormatCount(static_cast<int64_t>(shown)) + " of " +
         FormatCount(static_cast<int64_t>(ctx.order.size())) +
         " regions shown: every k-th by price level, from the dearest to the cheapest. " + where +
         "</p>\n";
}

std::string OpenSection(const std::string& id, const std::string& title) {
  return "<section id=\"" + id + "\"><h2>" + title + "</h2>\n";
}

std::string Card(const std::string& value, const std::string& label) {
  return "<div class=\"card\"><div class=\"value\">" + value + "</div><div class=\"label\">" +
         label + "</div></div>";
}

}  // namespace paritas::internal::report
