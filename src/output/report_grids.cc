// The region grids: price levels by aggregate, the parity matrix and the
// survey's coverage. Rows past kReportMaxGridRegions are thinned (every k-th
// region by price level) or binned, so the page stays small at any size.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {
namespace {

// The nodes shown against regions: the root, then every aggregate below it
// at any depth (not only its children), in the classification's order so a
// nested aggregate follows its parent, then the groups. Past kMaxColumns
// aggregates, those with the largest expenditure are kept (still in
// classification order).
std::vector<int> AggregateColumns(const Context& ctx) {
  constexpr size_t kMaxColumns = 40, kMaxGroups = 24;
  const Classification& tree = ctx.survey.classification;
  std::vector<int> aggregates;
  for (int n = 1; n < tree.num_tree_nodes(); ++n) {
    if (!tree.nodes()[n].is_leaf) aggregates.push_back(n);
  }
  if (aggregates.size() > kMaxColumns) {
    std::vector<double> total(ctx.result.nodes.size(), 0.0);
    for (int c : aggregates) {
      const Eigen::VectorXd& e = ctx.result.nodes[c].expenditure;
      for (int r = 0; r < e.size(); ++r) total[c] += std::isfinite(e(r)) ? e(r) : 0.0;
    }
    std::stable_sort(aggregates.begin(), aggregates.end(),
                     [&](int a, int b) { return total[a] > total[b]; });
    aggregates.resize(kMaxColumns);
    std::sort(aggregates.begin(), aggregates.end());
  }
  std::vector<int> columns = {0};
  columns.insert(columns.end(), aggregates.begin(), aggregates.end());
  const int num_nodes = static_cast<int>(tree.nodes().size());
  for (int n = tree.num_tree_nodes();
       n < num_nodes && n < tree.num_tree_nodes() + static_cast<int>(kMaxGroups); ++n) {
    columns.push_back(n);
  }
  return columns;
}

// The column tooltip of a node: "label (code)", the aggregates it sits in,
// or that it is a group.
std::string ColumnTip(const Context& ctx, int node) {
  const Classification& tree = ctx.survey.classification;
  const ClassificationNode& n = tree.nodes()[node];
  std::string tip = ctx.NodeTip(node);
  if (n.is_group) return tip + ", analytic group";
  std::string path;
  for (int p = n.parent; p >= 0; p = tree.nodes()[p].parent) {
    path = ctx.NodeName(p) + (path.empty() ? "" : " \xE2\x80\xBA " + path);
  }
  return path.empty() ? tip : tip + ", in " + path;
}

// "food, housing" from codes, each by its node's name.
std::string NodeNames(const Context& ctx, const std::vector<PlacedCode>& codes) {
  std::vector<std::string> names;
  for (const PlacedCode& c : codes) {
    const int n = ctx.survey.classification.FindNode(c.code);
    names.push_back(HtmlEscape(n >= 0 ? ctx.NodeTip(n) : c.code));
  }
  return JoinNames(names);
}

// The definition of group `node` as the configuration wrote it.
std::string GroupDefinitionHtml(const Context& ctx, int node) {
  if (ctx.in.config == nullptr) return "";
  const std::string& code = ctx.survey.classification.nodes()[node].code;
  for (const GroupDefinition& g : ctx.in.config->groups) {
    if (g.code.code != code) continue;
    std::string out;
    if (!g.from.code.empty()) out += NodeNames(ctx, {g.from});
    if (!g.of.empty()) out += std::string(out.empty() ? "" : " and ") + NodeNames(ctx, g.of);
    if (!g.without.empty()) out += " without " + NodeNames(ctx, g.without);
    return out;
  }
  return "";
}

}  // namespace

std::string Grid(const GridSpec& g) {
  const int rows = static_cast<int>(g.values.size());
  const int cols = static_cast<int>(g.column_labels.size());
  size_t max_chars = 4;
  for (const std::string& l : g.row_labels) max_chars = std::max(max_chars, CodePoints(l));
  max_chars = std::min<size_t>(max_chars, 28);
  const double label_w = 14.0 + 6.4 * static_cast<double>(max_chars);
  const double gap = 8.0 * static_cast<double>(g.gap_before.size());
  const double cell_w =
      std::clamp((kChartWidth - label_w - 16.0 - gap) / std::max(1, cols), 6.0, g.max_cell_w);
  const double cell_h = rows <= 30 ? std::min(22.0, std::max(cell_w * 0.62, 14.0))
                                   : std::max(8.0, std::min(16.0, cell_w));
  size_t max_col_chars = 3;
  for (const std::string& l : g.column_labels)
    max_col_chars = std::max(max_col_chars, CodePoints(l));
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
  std::string out = "<svg class=\"chart grid-chart\" id=\"" + g.id + "\" viewBox=\"0 0 " +
                    C(width) + " " + C(height) + "\" style=\"max-width:" + C(width) +
                    "px\" role=\"img\" aria-label=\"" + HtmlEscape(g.aria) + "\">";
  for (int c = 0; c < cols; ++c) {
    const double cx = col_x(c) + cell_w / 2;
    std::string label = HtmlEscape(Truncate(g.column_labels[c], max_col_chars));
    if (c < static_cast<int>(g.column_tips.size()) && !g.column_tips[c].empty()) {
      label = "<title>" + HtmlEscape(g.column_tips[c]) + "</title>" + label;
    }
    const std::string cls = g.column_bold[c] ? "col-label strong" : "col-label";
    if (rotate) {
      out += "<text class=\"" + cls + "\" transform=\"translate(" + C(cx + 3) + " " +
             C(header_h - 4) + ") rotate(-50)\">" + label + "</text>";
    } else {
      out += "<text class=\"" + cls + "\" x=\"" + C(cx) + "\" y=\"" + C(header_h - 7) +
             "\" text-anchor=\"middle\">" + label + "</text>";
    }
  }
  for (int r = 0; r < rows; ++r) {
    const double y = header_h + cell_h * r;
    out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(y + cell_h / 2 + 4) +
           "\" text-anchor=\"end\">";
    if (!g.row_tips.empty()) out += "<title>" + HtmlEscape(g.row_tips[r]) + "</title>";
    out += HtmlEscape(Truncate(g.row_labels[r], max_chars)) + "</text>";
    for (int c = 0; c < cols; ++c) {
      const double v = g.values[r][c];
      const double x = col_x(c);
      const std::string tip = "<title>" + HtmlEscape(g.tip(r, c, v)) + "</title>";
      if (!std::isfinite(v)) {
        out += "<rect class=\"cell none\" x=\"" + C(x) + "\" y=\"" + C(y) + "\" width=\"" +
               C(cell_w) + "\" height=\"" + C(cell_h) + "\">" + tip + "</rect>";
        continue;
      }
      const Rgb colour = g.colour(v);
      out += "<rect class=\"cell\" x=\"" + C(x) + "\" y=\"" + C(y) + "\" width=\"" + C(cell_w) +
             "\" height=\"" + C(cell_h) + "\" fill=\"" + Hex(colour) + "\">" + tip + "</rect>";
      if (labels) {
        out += "<text class=\"cell-value" + std::string(WantsDarkText(colour) ? "" : " on-dark") +
               "\" x=\"" + C(x + cell_w / 2) + "\" y=\"" + C(y + cell_h / 2 + 3.5) +
               "\" text-anchor=\"middle\">" + g.format(v) + "</text>";
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
  const int num_tree_nodes = ctx.survey.classification.num_tree_nodes();
  g.gap_before = {1};
  for (int c = 0; c < static_cast<int>(columns.size()); ++c) {
    g.column_labels.push_back(ctx.NodeName(columns[c]));
    g.column_tips.push_back(ColumnTip(ctx, columns[c]));
    g.column_bold.push_back(columns[c] == 0);
    if (columns[c] >= num_tree_nodes && (c == 0 || columns[c - 1] < num_tree_nodes)) {
      g.gap_before.insert(c);
    }
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
    std::string tip = ctx.Label(rows[r]) + " \xC2\xB7 " + ctx.NodeTip(columns[c]) +
                      (columns[c] >= ctx.survey.classification.num_tree_nodes() ? " (group)" : "") +
                      ": " + Num(v, kTableParityDecimals);
    const std::string kinds = WarningKindsOf(ctx, columns[c], rows[r]);
    return kinds.empty() ? tip : tip + " \xE2\x9A\xA0 warnings: " + kinds;
  };
  std::string out = OpenSection("aggregates", "Price levels by aggregate");
  const bool has_groups = columns.back() >= num_tree_nodes;
  out += "<p>Price level of each region in <b>" + HtmlEscape(ctx.root_code) +
         "</b> (first column) and in every aggregate below it, nested ones after their parent "
         "(hover over a column title for its place in the classification)" +
         std::string(has_groups ? ", then in each group (after the second gap)" : "") +
         ", each normalised on its own (" + HtmlEscape(ctx.root.reference_used) +
         " = 100). Read along a row to see which categories make a region dear or cheap.</p>\n";
  int num_aggregates = 0;
  for (int n = 1; n < num_tree_nodes; ++n)
    num_aggregates += ctx.survey.classification.nodes()[n].is_leaf ? 0 : 1;
  const int num_shown = static_cast<int>(std::count_if(
      columns.begin(), columns.end(), [&](int n) { return n > 0 && n < num_tree_nodes; }));
  if (num_shown < num_aggregates) {
    out += "<p class=\"note\">The " + FormatCount(num_shown) + " of " +
           FormatCount(num_aggregates) +
           " aggregates with the largest expenditure are shown; every node is in "
           "<code>parities.csv</code>.</p>";
  }
  out += Grid(g);
  out += ThinningNote(ctx, rows.size(), "Every region and node is in <code>parities.csv</code>.");
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-aggregates") +
         "<span class=\"key\"><svg width=\"16\" height=\"12\"><rect class=\"cell none\" "
         "width=\"16\" height=\"12\"/></svg> no price level</span></div>\n";
  return out + "</section>\n";
}

std::string GroupSection(const Context& ctx) {
  const Classification& tree = ctx.survey.classification;
  std::string out = OpenSection("groups", "Groups");
  out +=
      "<p>Each group is an aggregate of the basic headings listed, computed from their parities "
      "and expenditure with the run's aggregation method and normalised on its own, like every "
      "aggregate of the classification. A group is not built from the aggregates' parities, so "
      "under a method that is not additive it need not lie between them.</p>\n"
      "<div class=\"table-scroll\"><table class=\"data wrap\" id=\"group-table\"><thead><tr>"
      "<th>group</th><th>label</th><th>definition</th><th>basic headings</th>"
      "<th>cheapest</th><th>dearest</th></tr></thead><tbody>";
  for (int n = tree.num_tree_nodes(); n < static_cast<int>(tree.nodes().size()); ++n) {
    const ClassificationNode& node = tree.nodes()[n];
    std::vector<std::string> headings;
    for (int h : node.headings) headings.push_back(ctx.NodeTip(tree.headings()[h]));
    const NodeResult& result = ctx.result.nodes[n];
    int low = -1, high = -1;
    for (int r = 0; r < result.parity.size(); ++r) {
      if (!std::isfinite(result.parity(r))) continue;
      if (low < 0 || result.parity(r) < result.parity(low)) low = r;
      if (high < 0 || result.parity(r) > result.parity(high)) high = r;
    }
    auto level = [&](int r) {
      return r < 0 ? std::string("\xE2\x80\x93")
                   : HtmlEscape(ctx.Label(r)) + " " + Num(result.parity(r), kTableParityDecimals);
    };
    out += "<tr><td><code>" + HtmlEscape(node.code) + "</code></td><td>" + HtmlEscape(node.label) +
           "</td><td><div class=\"long\">" + GroupDefinitionHtml(ctx, n) +
           "</div></td><td><div class=\"long\">" +
           FormatCount(static_cast<int64_t>(headings.size())) + ": " +
           HtmlEscape(JoinNames(headings)) + "</div></td><td>" + level(low) + "</td><td>" +
           level(high) + "</td></tr>";
  }
  return out + "</tbody></table></div>\n</section>\n";
}

std::string MatrixSection(const Context& ctx) {
  const std::vector<int> regions = EveryKth(ctx.order, kReportMaxGridRegions);
  GridSpec g;
  g.id = "matrix-grid";
  g.aria =
      "parity matrix of the root: cost in the column region of what costs 100 in the row region";
  // Regions by name, as in every other chart; the code is in the tooltips.
  for (int b : regions) {
    g.column_labels.push_back(ctx.Label(b));
    g.column_tips.push_back(ctx.Label(b) + " (" + ctx.Code(b) + ")");
    g.column_bold.push_back(false);
  }
  for (int a : regions) {
    g.row_labels.push_back(ctx.Label(a));
    g.row_tips.push_back(ctx.Label(a) + " (" + ctx.Code(a) + ")");
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
    return "what costs 100 in " + ctx.Label(regions[r]) + " costs " + Num(v, kTableParityDecimals) +
           " in " + ctx.Label(regions[c]);
  };
  g.max_cell_w = 54.0;
  std::string out = OpenSection("matrix", "Parity matrix");
  out +=
      "<p>Cell (row <i>a</i>, column <i>b</i>) is 100 \xC3\x97 P<sub>b</sub> / P<sub>a</sub> for "
      "<b>" +
      HtmlEscape(ctx.root_code) +
      "</b>: what costs 100 in the row region costs this much in the column region. Regions are in "
      "price-level order, dearest first; the matrix is transitive, so each row is the price-level "
      "chart seen from one region.</p>\n";
  out += Grid(g);
  out += ThinningNote(ctx, regions.size(),
                      ctx.in.pair_tables_written ? "The full matrix is in <code>matrix/</code>."
                                                 : kPairTablesLeftOut);
  out += "<div class=\"legend-row\">" + DivergingLegend(scale, "legend-matrix") + "</div>\n";
  return out + "</section>\n";
}

namespace {

// Columns of the coverage grid: regions in price-level order (regions
// without a parity at the end), binned into at most kReportMaxGridRegions
// groups of consecutive ranks.
std::vector<std::vector<int>> RankBins(const Context& ctx) {
  std::vector<int> regions = ctx.order;
  regions.insert(regions.end(), ctx.missing.begin(), ctx.missing.end());
  const int n = static_cast<int>(regions.size());
  const int num_bins = std::min(n, kReportMaxGridRegions);
  std::vector<std::vector<int>> bins(num_bins);
  for (int i = 0; i < n; ++i) {
    bins[static_cast<size_t>(static_cast<int64_t>(i) * num_bins / n)].push_back(regions[i]);
  }
  return bins;
}

// Names the columns: the region, or the ranks a bin holds; then "all regions".
void CoverageColumns(const Context& ctx, const std::vector<std::vector<int>>& bins, bool binned,
                     GridSpec* g) {
  for (const std::vector<int>& bin : bins) {
    if (!binned) {
      g->column_labels.push_back(ctx.Label(bin.front()));
      g->column_tips.push_back(ctx.Label(bin.front()) + " (" + ctx.Code(bin.front()) + ")");
    } else {
      int begin = 1;
      for (const std::vector<int>* b = bins.data(); b != &bin; ++b) {
        begin += static_cast<int>(b->size());
      }
      const int end = begin + static_cast<int>(bin.size()) - 1;
      g->column_labels.push_back(begin == end ? std::to_string(begin)
                                              : std::to_string(begin) + "\xE2\x80\x93" +
                                                    std::to_string(end));
      g->column_tips.push_back("ranks " + g->column_labels.back() + ": " + ctx.Label(bin.front()) +
                               " to " + ctx.Label(bin.back()));
    }
    g->column_bold.push_back(false);
  }
  g->column_labels.push_back("all regions");
  g->column_tips.push_back("");
  g->column_bold.push_back(true);
  g->gap_before = {static_cast<int>(bins.size())};
}

// One row per heading: the share of its items priced in each bin and in all
// `num_regions`. Returns the share over every heading.
double CoverageRows(const Survey& s, const std::vector<std::vector<int>>& bins, int num_regions,
                    GridSpec* g) {
  // Items priced per region x heading, from the cell table.
  std::vector<std::vector<int>> priced(s.num_headings(), std::vector<int>(s.num_regions(), 0));
  for (int h = 0; h < s.num_headings(); ++h) {
    const HeadingRange& range = s.heading_range[h];
    for (int64_t c = range.cell_begin; c < range.cell_end; ++c) ++priced[h][s.cells.region[c]];
  }
  const int n = num_regions;
  int64_t total_priced = 0, total_possible = 0;
  for (int h = 0; h < s.num_headings(); ++h) {
    const int num_items = s.heading_range[h].num_items();
    const ClassificationNode& node = s.classification.nodes()[s.classification.headings()[h]];
    g->row_labels.push_back(node.label.empty() ? node.code : node.label);
    g->row_tips.push_back((node.label.empty() ? "" : node.label + " (") + node.code +
                          (node.label.empty() ? "" : ")") + ": " + FormatCount(num_items) +
                          " items, " + FormatCount(s.heading_range[h].num_cells()) + " cells");
    std::vector<double> line;
    int64_t heading_priced = 0;
    for (const std::vector<int>& bin : bins) {
      int64_t sum = 0;
      for (int r : bin) sum += priced[h][r];
      line.push_back(num_items > 0
                         ? static_cast<double>(sum) / (static_cast<double>(num_items) * bin.size())
                         : kNaN);
      heading_priced += sum;
    }
    line.push_back(num_items > 0
                       ? static_cast<double>(heading_priced) / (static_cast<double>(num_items) * n)
                       : kNaN);
    total_priced += heading_priced;
    total_possible += static_cast<int64_t>(num_items) * n;
    g->values.push_back(line);
  }
  return total_possible > 0 ? static_cast<double>(total_priced) / total_possible : kNaN;
}

}  // namespace

std::string CoverageSection(const Context& ctx) {
  const std::vector<std::vector<int>> bins = RankBins(ctx);
  const int n = static_cast<int>(ctx.order.size() + ctx.missing.size());
  const int num_bins = static_cast<int>(bins.size());
  const bool binned = num_bins < n;
  GridSpec g;
  g.id = "coverage-grid";
  g.aria = "share of each heading's items priced in each region";
  CoverageColumns(ctx, bins, binned, &g);
  const double overall = CoverageRows(ctx.survey, bins, n, &g);
  g.colour = [](double v) { return Interpolate(kSequentialStops, v); };
  g.format = [](double v) { return FormatFixed(100.0 * v, 0); };
  g.tip = [&g, &bins, &ctx, binned](int r, int c, double v) {
    std::string where = "all regions";
    if (c < static_cast<int>(bins.size())) {
      where = binned ? "ranks " + g.column_labels[c] + ", " + ctx.Label(bins[c].front()) + " to " +
                           ctx.Label(bins[c].back()) + " (" + std::to_string(bins[c].size()) +
                           " regions)"
                     : ctx.Label(bins[c].front());
    }
    return g.row_labels[r] + " \xC2\xB7 " + where + ": " + Percent(v, 1) + " of items priced";
  };
  g.max_cell_w = 44.0;
  std::string out = OpenSection("coverage", "Coverage of the survey");
  out +=
      "<p>Share of each basic heading's items that were priced in each region (percent; regions "
      "in price-level order, dearest first). Overall " +
      Percent(overall, 1) +
      " of heading items were priced. Thin coverage makes a heading's parity rest on few "
      "items.</p>\n";
  out += Grid(g);
  if (binned) {
    out += "<p class=\"note\">" + FormatCount(n) + " regions in " + FormatCount(num_bins) +
           " columns of consecutive price-level ranks (1 = dearest; regions without a price level "
           "last); a column shows the mean share of its regions.</p>\n";
  }
  out += "<div class=\"legend-row\">" + SequentialLegend("legend-coverage") +
         "<span class=\"key\"><svg width=\"16\" height=\"12\"><rect class=\"cell none\" "
         "width=\"16\" height=\"12\"/></svg> heading lists no items</span></div>\n";
  return out + "</section>\n";
}

}  // namespace paritas::internal::report
