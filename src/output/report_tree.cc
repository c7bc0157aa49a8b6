// The spanning tree of the root (spanning-tree method): an indented drawing,
// one row per region in depth-first order with its depth as indent, which
// stays readable for any tree shape, and a table of the edges. The drawing is
// left out above kMaxDrawn regions, where rows would be too many to read.
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {
namespace {

constexpr size_t kMaxDrawn = 60;

// Rows of the drawing: regions in depth-first order from the root, with depth.
void DepthFirst(const std::vector<std::vector<int>>& children, int region, int depth,
                std::vector<std::pair<int, int>>* rows) {
  rows->push_back({region, depth});
  for (int child : children[region]) DepthFirst(children, child, depth + 1, rows);
}

std::string TreeDrawing(const Context& ctx, const std::vector<TreeEdge>& tree) {
  const int n = ctx.survey.num_regions();
  std::vector<std::vector<int>> children(n);
  std::vector<int> parent(n, -1);
  std::vector<double> spread(n, kNaN);
  for (const TreeEdge& e : tree) {
    children[e.from].push_back(e.to);
    parent[e.to] = e.from;
    spread[e.to] = e.spread;
  }
  std::vector<std::pair<int, int>> rows;
  for (int r = 0; r < n; ++r) {
    if (parent[r] < 0 && !children[r].empty()) DepthFirst(children, r, 0, &rows);
  }
  int max_depth = 0;
  for (const auto& row : rows) max_depth = std::max(max_depth, row.second);
  const double row_h = 20.0, top = 14.0, left = 16.0;
  const double step = std::min(48.0, (kChartWidth - 260.0) / std::max(1, max_depth));
  std::vector<double> x(n), y(n);
  for (size_t i = 0; i < rows.size(); ++i) {
    x[rows[i].first] = left + step * rows[i].second;
    y[rows[i].first] = top + row_h * static_cast<double>(i);
  }
  std::string out = "<svg class=\"chart\" id=\"spanning-tree\" viewBox=\"0 0 " + C(kChartWidth) +
                    " " + C(top + row_h * static_cast<double>(rows.size())) +
                    "\" role=\"img\" aria-label=\"minimum spanning tree of the regions\">";
  for (const auto& [r, depth] : rows) {
    if (parent[r] >= 0) {  // elbow from the parent down and across
      out += "<path class=\"axis\" fill=\"none\" d=\"M" + C(x[parent[r]]) + " " + C(y[parent[r]]) +
             "V" + C(y[r]) + "H" + C(x[r]) + "\"/>";
    }
  }
  for (const auto& [r, depth] : rows) {
    out += "<circle class=\"dot\" cx=\"" + C(x[r]) + "\" cy=\"" + C(y[r]) + "\" r=\"4\"/>";
    std::string label = HtmlEscape(Truncate(ctx.Label(r), 24));
    if (parent[r] >= 0)
      label += " <tspan class=\"muted\">" + Num(100.0 * spread[r], 2) + " %</tspan>";
    out += "<text class=\"row-label\" x=\"" + C(x[r] + 8) + "\" y=\"" + C(y[r] + 4) + "\">" +
           label + "</text>";
  }
  return out + "</svg>\n";
}

}  // namespace

std::string TreeSection(const Context& ctx) {
  const std::vector<TreeEdge>& tree = ctx.root.tree;
  std::string out = OpenSection("tree", "Spanning tree");
  out +=
      "<p>Parities for <b>" + HtmlEscape(ctx.root_code) +
      "</b> are bilateral Fisher indices chained along the tree that links every region with the "
      "smallest total Paasche\xE2\x80\x93Laspeyres spread, 100 \xC3\x97 |ln(L / P)| (Hill 1999). "
      "A region with few headings has small spreads to all (fewer headings are compared) and may "
      "become a hub, so its links deserve a look. Each "
      "region is drawn under the region it is compared with, labelled with the spread of that "
      "link. The tree of every aggregate is in <code>tree/</code>.</p>\n";
  if (ctx.survey.num_regions() <= static_cast<int>(kMaxDrawn)) {
    out += TreeDrawing(ctx, tree);
  } else {
    out += "<p class=\"note\">More than " + std::to_string(kMaxDrawn) +
           " regions: the tree is listed, not drawn.</p>\n";
  }
  out +=
      "<div class=\"table-scroll\"><table class=\"data sortable\" id=\"tree-table\"><thead><tr>"
      "<th>from</th><th>to</th><th class=\"num\">P\xE2\x80\x93L spread, %</th><th "
      "class=\"num\">Fisher (from = 100)</th></tr></thead><tbody>";
  for (const TreeEdge& e : tree) {
    out += "<tr><td>" + HtmlEscape(ctx.Label(e.from)) + "</td><td>" + HtmlEscape(ctx.Label(e.to)) +
           "</td><td class=\"num\" data-v=\"" + FormatFixed(100.0 * e.spread, 6) + "\">" +
           Num(100.0 * e.spread, 2) + "</td><td class=\"num\" data-v=\"" +
           FormatFixed(100.0 * e.fisher, 6) + "\">" + Num(100.0 * e.fisher, kTableParityDecimals) +
           "</td></tr>";
  }
  return out + "</tbody></table></div>\n</section>\n";
}

}  // namespace paritas::internal::report
