// "Which regions can be told apart?": for the root and each top-level
// aggregate, a region x region chart of the verdicts of the pair intervals
// (dearest first, so a block of grey around the diagonal is a group that
// cannot be told apart), and the regions in rank order cut where two
// neighbours are told apart. The chart is left out above
// kMaxPairMatrixRegions regions; the cut list reads at any size.
#include <cmath>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {
namespace {

// Above this many regions the matrix would have cells too small to read.
constexpr size_t kMaxPairMatrixRegions = 40;
// Codes listed per group; the rest are counted.
constexpr size_t kMaxCodesPerGroup = 12;

// The chart's three verdict colours and its blank cells, each with its name.
std::string PairLegend() {
  auto key = [](const char* fill, const char* name) {
    return std::string("<span class=\"key\"><svg class=\"legend\" width=\"16\" height=\"12\">"
                       "<rect width=\"16\" height=\"12\" fill=\"") +
           fill + "\"/></svg> " + name + "</span>";
  };
  return "<div class=\"legend-row\">" + key("#d6604d", "row region dearer") +
         key("#4393c3", "row region cheaper") + key("#e0e0e0", "not told apart") +
         "<span class=\"key\"><svg width=\"16\" height=\"12\"><rect class=\"cell none\" "
         "width=\"16\" height=\"12\"/></svg> no interval (a region against itself)</span></div>\n";
}

std::string PairMatrix(const Context& ctx, const ReportSensitivity::PairChart& chart) {
  const size_t count = chart.order.size();
  GridSpec g;
  g.id = "pairs-" + ctx.survey.classification.nodes()[chart.node].code;
  g.aria = "which regions are dearer, cheaper or not told apart at " + ctx.NodeName(chart.node);
  for (int r : chart.order) {
    g.row_labels.push_back(ctx.Code(r));
    g.row_tips.push_back(ctx.Label(r));
    g.column_labels.push_back(ctx.Code(r));
    g.column_bold.push_back(false);
  }
  g.values.assign(count, std::vector<double>(count, std::nan("")));
  for (size_t i = 0; i < count; ++i) {
    for (size_t j = 0; j < count; ++j) g.values[i][j] = chart.verdict[i * count + j];
  }
  g.colour = [](double v) {
    if (v > 0.5) return Rgb{214, 96, 77};
    if (v < -0.5) return Rgb{67, 147, 195};
    return Rgb{224, 224, 224};
  };
  g.format = [](double v) {
    return std::string(v > 0.5 ? "&gt;" : v < -0.5 ? "&lt;" : "=");
  };
  g.tip = [&ctx, &chart](int i, int j, double v) {
    const std::string a = ctx.Code(chart.order[i]), b = ctx.Code(chart.order[j]);
    if (!std::isfinite(v)) return i == j ? a : a + " and " + b + ": no interval";
    return a + (v > 0.5 ? " dearer than " : v < -0.5 ? " cheaper than " : " not told apart from ") +
           b;
  };
  g.max_cell_w = 30.0;
  return Grid(g) + PairLegend();
}

// The regions dearest first, cut into groups where neighbours in rank are
// told apart.
std::string RankGroups(const Context& ctx, const ReportSensitivity::PairChart& chart) {
  std::vector<std::vector<int>> groups;
  for (size_t k = 0; k < chart.order.size(); ++k) {
    if (k == 0 || chart.neighbour_apart[k - 1] == 1.0) groups.emplace_back();
    groups.back().push_back(chart.order[k]);
  }
  std::string out = "<ol class=\"pair-groups\">";
  for (const std::vector<int>& group : groups) {
    out += "<li>";
    for (size_t k = 0; k < group.size() && k < kMaxCodesPerGroup; ++k) {
      out += std::string(k > 0 ? ", " : "") + "<span title=\"" + HtmlEscape(ctx.Label(group[k])) +
             "\">" + HtmlEscape(ctx.Code(group[k])) + "</span>";
    }
    if (group.size() > kMaxCodesPerGroup) {
      out += " and " + FormatCount(static_cast<int64_t>(group.size() - kMaxCodesPerGroup)) +
             " more";
    }
    out += "</li>";
  }
  return out + "</ol>\n";
}

}  // namespace

std::string PairChartsHtml(const Context& ctx, const ReportSensitivity& s) {
  if (s.pair_charts.empty()) return "";
  std::string out =
      "<h3>Which regions can be told apart</h3><p>Two regions are told apart when the " +
      HtmlEscape(s.pair_level_label) +
      " interval of the ratio of their parities, taken from the same bootstrap replicates, "
      "excludes 1. In the charts each row region is <span style=\"color:#d6604d\">dearer</span>, "
      "<span style=\"color:#4393c3\">cheaper</span> or not told apart (grey) from each column "
      "region, dearest first. The lists run dearest first and start a new group where a "
      "region is told apart from the one before it; a group's first and last regions may "
      "still be told apart from each other. Each pair is judged on its own, with no "
      "correction for the number of comparisons: of the pairs whose levels are equal, some "
      "are told apart by chance (about 5 in 100 at a 95 % level). Every pair's interval is in "
      "sensitivity/pair_ratios.csv.</p>\n";
  for (const ReportSensitivity::PairChart& chart : s.pair_charts) {
    out += "<h4>" + HtmlEscape(ctx.NodeName(chart.node)) + "</h4>\n";
    const size_t count = chart.order.size();
    if (!chart.verdict.empty() && count <= kMaxPairMatrixRegions) {
      out += PairMatrix(ctx, chart);
    } else if (count > kMaxPairMatrixRegions) {
      out += "<p class=\"note\">" + FormatCount(static_cast<int64_t>(count)) +
             " regions: too many for a chart; the groups of neighbours in rank follow.</p>\n";
    }
    if (count > 0) out += RankGroups(ctx, chart);
  }
  return out;
}

}  // namespace paritas::internal::report
