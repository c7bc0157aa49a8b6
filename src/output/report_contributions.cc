// "Why regions are dear": one region's root price level taken apart heading
// by heading, and an overview of every region with the same bars summed to
// the root's first-level groups, so the panels share one scale and can be
// compared at a glance. The contributions are additive in logs, so summing
// them within a group is exact. Values are shown as log points x 100 and
// called "about %", which is what a reader needs.
#include <algorithm>
#include <cmath>
#include <map>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"
#include "paritas/use/heading_contributions.h"

namespace paritas::internal::report {
namespace {

constexpr const char* kDearer = "#c25400";
constexpr const char* kCheaper = "#1f5f99";
// Bars of the one-region chart before the rest are summed.
constexpr size_t kMaxExplainedBars = 12;
// Groups drawn in each small panel before the rest are summed.
constexpr size_t kMaxPanelGroups = 8;

// A signed figure; one that rounds to zero gets no sign.
std::string Signed(double value, int decimals) {
  if (!std::isfinite(value)) return "\xE2\x80\x93";
  const std::string text = FormatFixed(value, decimals);
  const bool zero = text.find_first_not_of("-0.") == std::string::npos;
  return zero ? FormatFixed(0.0, decimals) : (value > 0 ? "+" : "") + text;
}

struct Bar {
  std::string label;
  double value = 0.0;  // log points x 100
  // Shown in the tooltip before the value (e.g. "label (code)"); empty =
  // the label.
  std::string tip;
};

// The root's rows by region.
std::map<int, const RegionContributions*> RootRows(const ContributionTable& table) {
  std::map<int, const RegionContributions*> rows;
  for (const RegionContributions& row : table.rows) {
    if (row.node == 0) rows[row.region] = &row;
  }
  return rows;
}

// Horizontal bars from 0, dearer to the right; `id` names the chart.
std::string Bars(const std::vector<Bar>& bars, const std::string& id, const std::string& aria,
                 const std::string& axis_title) {
  double lo = 0, hi = 0;
  size_t max_chars = 8;
  for (const Bar& b : bars) {
    lo = std::min(lo, b.value);
    hi = std::max(hi, b.value);
    max_chars = std::max(max_chars, CodePoints(b.label));
  }
  max_chars = std::min<size_t>(max_chars, 32);
  const double pad = 0.12 * (hi - lo) + 0.1;
  lo -= pad;
  hi += pad;
  const double label_w = 18.0 + 6.6 * max_chars, x0 = label_w + 10, x1 = kChartWidth - 50;
  const double top = 18, row_h = 22, height = top + row_h * bars.size() + 36;
  auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
  std::string out = "<svg class=\"chart\" id=\"" + id + "\" viewBox=\"0 0 " + C(kChartWidth) + " " +
                    C(height) + "\" role=\"img\"><title>" + HtmlEscape(aria) + "</title>";
  const std::vector<double> ticks = NiceTicks(lo, hi, 8);
  for (double t : ticks) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top) +
           "\" y2=\"" + C(top + row_h * bars.size()) + "\"/><text class=\"tick\" x=\"" + C(x(t)) +
           "\" y=\"" + C(top + row_h * bars.size() + 16) + "\" text-anchor=\"middle\">" +
           Num(t, TickDecimals(ticks)) + "</text>";
  }
  for (size_t i = 0; i < bars.size(); ++i) {
    const double y = top + row_h * i, v = bars[i].value;
    const bool strong = i + 1 == bars.size() && bars[i].label.rfind("all ", 0) == 0;
    const std::string& tip = bars[i].tip.empty() ? bars[i].label : bars[i].tip;
    out += "<g><title>" + HtmlEscape(tip + ": " + Signed(v, 2) + " (about %)") +
           "</title><text class=\"row-label" + std::string(strong ? " strong" : "") + "\" x=\"" +
           C(label_w) + "\" y=\"" + C(y + row_h / 2 + 4) + "\" text-anchor=\"end\">" +
           HtmlEscape(Truncate(bars[i].label, max_chars)) + "</text><rect x=\"" +
           C(std::min(x(0), x(v))) + "\" y=\"" + C(y + 4) + "\" width=\"" +
           C(std::max(1.0, std::abs(x(v) - x(0)))) + "\" height=\"" + C(row_h - 8) + "\" fill=\"" +
           (v >= 0 ? kDearer : kCheaper) + "\"" +
           (strong ? " stroke=\"#1d2329\" stroke-width=\"1.2\"" : "") +
           "/><text class=\"value\" x=\"" + C(x(v) + (v >= 0 ? 4 : -4)) + "\" y=\"" +
           C(y + row_h / 2 + 4) + "\" text-anchor=\"" + (v >= 0 ? "start" : "end") + "\">" +
           Signed(v, 1) + "</text></g>";
  }
  out += "<line class=\"reference\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" + C(top) +
         "\" y2=\"" + C(top + row_h * bars.size()) + "\"/><text class=\"axis-title\" x=\"" +
         C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) + "\" text-anchor=\"middle\">" +
         HtmlEscape(axis_title) + "</text></svg>\n";
  return out;
}

// The chosen region's bars: the largest contributions, the rest summed, and
// the total last.
std::vector<Bar> RegionBars(const Context& ctx, const RegionContributions& row) {
  std::vector<const HeadingContribution*> sorted;
  for (const HeadingContribution& c : row.headings) sorted.push_back(&c);
  std::stable_sort(sorted.begin(), sorted.end(), [](const auto* a, const auto* b) {
    return std::abs(a->log_contribution) > std::abs(b->log_contribution);
  });
  std::vector<Bar> bars;
  double rest = 0.0;
  for (size_t k = 0; k < sorted.size(); ++k) {
    if (k < kMaxExplainedBars) {
      // Headings by name, as in the other charts; the code in the tooltip.
      const int node = ctx.survey.classification.headings()[sorted[k]->heading];
      bars.push_back({ctx.NodeName(node), 100.0 * sorted[k]->log_contribution, ctx.NodeTip(node)});
    } else {
      rest += 100.0 * sorted[k]->log_contribution;
    }
  }
  std::stable_sort(bars.begin(), bars.end(),
                   [](const Bar& a, const Bar& b) { return a.value > b.value; });
  if (sorted.size() > kMaxExplainedBars) {
    bars.push_back(
        {"other " + std::to_string(sorted.size() - kMaxExplainedBars) + " headings", rest, ""});
  }
  bars.push_back({"all headings", 100.0 * row.log_parity, ""});
  return bars;
}

// The root's first-level group of each heading (the heading itself when it
// hangs from the root).
std::vector<int> FirstLevelGroup(const Survey& survey) {
  const auto& nodes = survey.classification.nodes();
  std::vector<int> group(survey.num_headings(), 0);
  for (int h = 0; h < survey.num_headings(); ++h) {
    int n = survey.classification.headings()[h];
    while (n > 0 && nodes[n].parent > 0) n = nodes[n].parent;
    group[h] = n;
  }
  return group;
}

// One small panel: the groups' contributions to the region's root level, on
// the scale shared by every panel.
std::string Panel(const Context& ctx, int r, const std::vector<double>& by_group,
                  const std::vector<int>& groups, double span) {
  const double w = 260, row_h = 15, top = 34, label_w = 112;
  const double h = top + row_h * groups.size() + 8;
  auto x = [&](double v) { return label_w + 8 + (v + span) / (2 * span) * (w - label_w - 16); };
  // Data go into element text, never attributes: names are markup-proof
  // either way, but a serialised DOM shows attribute text unescaped.
  std::string out = "<svg class=\"panel\" viewBox=\"0 0 " + C(w) + " " + C(h) +
                    "\" role=\"img\"><title>" + HtmlEscape("contributions for " + ctx.Label(r)) +
                    "</title><text class=\"strong\" x=\"4\" y=\"14\">" +
                    HtmlEscape(Truncate(ctx.Label(r), 26)) + "</text><text class=\"value\" x=\"" +
                    C(w - 4) + "\" y=\"14\" text-anchor=\"end\">" +
                    Num(ctx.root.parity(r), kChartParityDecimals) + "</text>";
  out += "<line class=\"reference\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" +
         C(top - 8) + "\" y2=\"" + C(h - 4) + "\"/>";
  for (size_t i = 0; i < groups.size(); ++i) {
    const double v = by_group[i], y = top + row_h * i;
    const std::string name = groups[i] < 0 ? std::string("other") : ctx.NodeName(groups[i]);
    const std::string tip = groups[i] < 0 ? name : ctx.NodeTip(groups[i]);
    const double clamped = std::clamp(v, -span, span);
    out += "<g><title>" +
           HtmlEscape(ctx.Label(r) + ", " + tip + ": " + Signed(v, 2) + " (about %)") +
           "</title><text class=\"tick\" x=\"" + C(label_w) + "\" y=\"" + C(y + 10) +
           "\" text-anchor=\"end\">" + HtmlEscape(Truncate(name, 17)) + "</text><rect x=\"" +
           C(std::min(x(0), x(clamped))) + "\" y=\"" + C(y + 2) + "\" width=\"" +
           C(std::max(0.8, std::abs(x(clamped) - x(0)))) + "\" height=\"" + C(row_h - 4) +
           "\" fill=\"" + (v >= 0 ? kDearer : kCheaper) + "\"/></g>";
  }
  return out + "</svg>";
}

std::string Overview(const Context& ctx, const std::map<int, const RegionContributions*>& rows) {
  const std::vector<int> group_of = FirstLevelGroup(ctx.survey);
  const std::vector<int> shown = EveryKth(ctx.order, kReportMaxGridRegions);
  // Sum per region and group; groups ranked by their mean size.
  std::map<int, std::map<int, double>> sums;
  std::map<int, double> size;
  for (int r : shown) {
    const auto it = rows.find(r);
    if (it == rows.end()) continue;
    for (const HeadingContribution& c : it->second->headings) {
      sums[r][group_of[c.heading]] += 100.0 * c.log_contribution;
      size[group_of[c.heading]] += std::abs(100.0 * c.log_contribution);
    }
  }
  std::vector<int> groups;
  for (const auto& [g, s] : size) groups.push_back(g);
  std::stable_sort(groups.begin(), groups.end(), [&](int a, int b) { return size[a] > size[b]; });
  const bool has_other = groups.size() > kMaxPanelGroups;
  if (has_other) groups.resize(kMaxPanelGroups - 1);
  std::vector<int> drawn = groups;
  if (has_other) drawn.push_back(-1);
  double span = 0.5;
  std::map<int, std::vector<double>> values;
  for (int r : shown) {
    if (!sums.count(r)) continue;
    std::vector<double> v(drawn.size(), 0.0);
    for (const auto& [g, s] : sums[r]) {
      const auto at = std::find(groups.begin(), groups.end(), g);
      v[at == groups.end() ? drawn.size() - 1 : at - groups.begin()] += s;
    }
    for (double x : v) span = std::max(span, std::abs(x));
    values[r] = v;
  }
  std::string out = "<div class=\"multiples\">";
  for (int r : shown) {
    if (values.count(r)) out += Panel(ctx, r, values[r], drawn, span * 1.05);
  }
  out += "</div>\n" + ThinningNote(ctx, shown.size(), "Every region is in contributions.csv.");
  return out;
}

}  // namespace

std::string ContributionSection(const Context& ctx, const ContributionTable& table) {
  const std::map<int, const RegionContributions*> rows = RootRows(table);
  if (rows.empty()) return "";
  int region = ctx.order.empty() ? -1 : ctx.order.front();
  if (!ctx.in.explain_region.empty()) region = ctx.survey.regions.Find(ctx.in.explain_region);
  const auto it = rows.find(region);
  const std::string against =
      table.against_region ? "region " + HtmlEscape(ctx.root.reference_used) : "the average region";
  std::string out = OpenSection("why-dear", "Why regions are dear");
  out +=
      "<p>A region's price level is built from the price levels of its basic headings, each "
      "counted by how much is spent on it. The bars below take one region's level apart: "
      "each heading's bar says how much that heading alone makes the region dearer (orange, "
      "to the right) or cheaper (blue, to the left) than " +
      against +
      ". The figures are log points (100 \xC3\x97 the natural log of the price ratio): close "
      "to percent for small gaps, and unlike percent they add up, so the bars sum to the "
      "whole gap (the last bar).</p>\n";
  if (it != rows.end()) {
    out += "<h3>" + HtmlEscape(ctx.Label(region)) + ": price level " +
           Num(ctx.root.parity(region), kTableParityDecimals) + " (" +
           Signed(100.0 * it->second->log_parity, 1) + " log points)</h3>\n";
    out += Bars(RegionBars(ctx, *it->second), "why-dear-chart",
                "contribution of each heading to the price level of " + ctx.Label(region),
                "adds to the price level, log points (about %)");
  }
  out +=
      "<h3>Every region at a glance</h3>\n<p>The same split for every region, dearest first, "
      "with the headings summed into the groups directly under " +
      HtmlEscape(ctx.root_code) +
      ". All panels share one scale; the number at the top right is the region's price "
      "level.</p>\n";
  out += Overview(ctx, rows);
  out +=
      "<p class=\"note\">How the split is made: each heading's part is its difference in "
      "price from " +
      against +
      " (in logs), weighted by the average of the two spending "
      "shares, the form of the Törnqvist index" +
      std::string(table.against_region ? ""
                                       : ", averaged over every region as the GEKS "
                                         "method does") +
      "; what the aggregation method and the normalisation add beyond that is spread over "
      "the headings by the same weights. Every figure is in <code>contributions.csv</code>."
      "</p></section>\n";
  return out;
}

}  // namespace paritas::internal::report
