// The report page. Every chart is inline SVG drawn from the result, so the
// page needs nothing from outside, and every text from the data passes
// through HtmlEscape on its way in. Grids are thinned (every k-th region by
// price level) or binned past kReportMaxGridRegions so a survey of 1,000
// regions still gives a page of a few hundred kilobytes that opens at once.
// Colour is never the only channel: cells and bars carry their values. This
// file strings the sections together; each is drawn in a report_*.cc file.
#include "paritas/output/report.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

using internal::report::Context;

// The document head, the style sheet and the page's title bar.
std::string PageTop(const ReportInputs& inputs, bool usable, const std::string& root_code) {
  std::string out =
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
      "<meta name=\"generator\" content=\"paritas " PARITAS_VERSION
      "\">"
      "<title>Regional price levels" +
      (usable ? " \xE2\x80\x94 " + HtmlEscape(root_code) : std::string()) + "</title><style>" +
      internal::report::kStyle + "</style></head><body>\n";
  std::string subtitle = "paritas " PARITAS_VERSION;
  if (usable) {
    subtitle = FormatCount(inputs.survey->num_regions()) + " regions \xC2\xB7 " +
               FormatCount(inputs.survey->num_headings()) + " basic headings \xC2\xB7 reference " +
               HtmlEscape(inputs.result->nodes.front().reference_used) + " = 100 \xC2\xB7 " +
               subtitle;
  }
  out += "<header class=\"top\"><div class=\"wrap\"><h1>Regional price levels" +
         (usable ? ": " + HtmlEscape(root_code) : std::string()) + "</h1><div class=\"sub\">" +
         subtitle + "</div></div></header>\n";
  return out;
}

// Puts the regions with a root parity in price-level order, dearest first.
Context MakeContext(const ReportInputs& inputs, const std::string& root_code) {
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
  return ctx;
}

// Links to the sections the page holds.
std::string Navigation(bool has_bilaterals, bool has_tree, bool has_outliers, bool has_sensitivity,
                       bool has_groups, bool has_contributions) {
  std::string out =
      "<nav class=\"toc\" aria-label=\"sections\"><div class=\"wrap\"><a "
      "href=\"#overview\">Overview</a>"
      "<a href=\"#price-levels\">Price levels</a>";
  if (has_contributions) out += "<a href=\"#why-dear\">Why dear</a>";
  out += "<a href=\"#aggregates\">By aggregate</a>";
  if (has_groups) out += "<a href=\"#groups\">Groups</a>";
  out += "<a href=\"#matrix\">Parity matrix</a><a href=\"#coverage\">Coverage</a>";
  if (has_bilaterals) out += "<a href=\"#spread\">Bilateral spread</a>";
  if (has_tree) out += "<a href=\"#tree\">Spanning tree</a>";
  if (has_outliers) out += "<a href=\"#outliers\">Outliers</a>";
  if (has_sensitivity) out += "<a href=\"#sensitivity\">Sensitivity</a>";
  out +=
      "<a href=\"#methods\">Methods</a><a href=\"#cautions\">Cautions</a></div></nav>\n<main "
      "class=\"wrap\">\n";
  return out;
}

// The sections, in page order.
std::string Sections(const Context& ctx) {
  namespace report = internal::report;
  const ParityResult& result = ctx.result;
  const bool has_matrices =
      !result.bilaterals.empty() &&
      result.bilaterals.front().laspeyres.rows() == ctx.survey.num_regions();
  // Without the matrices, the spreads computed by row blocks stand in.
  const bool has_summary =
      !has_matrices &&
      result.root_spreads.regions.size() == static_cast<size_t>(ctx.survey.num_regions());
  const bool has_bilaterals = has_matrices || has_summary;
  const bool has_groups = ctx.survey.classification.num_tree_nodes() <
                          static_cast<int>(ctx.survey.classification.nodes().size());
  const bool has_contributions = ctx.in.contributions != nullptr && !ctx.order.empty();
  std::string out = Navigation(has_bilaterals, !ctx.root.tree.empty(), ctx.in.outliers != nullptr,
                               ctx.in.sensitivity != nullptr, has_groups, has_contributions);
  if (!ctx.in.extrapolation_caution.empty()) {
    out += "<section id=\"extrapolated\"><h2>Extrapolated parities</h2><ul class=\"cautions\"><li>" +
           HtmlEscape(ctx.in.extrapolation_caution) + "</li></ul></section>\n";
  }
  out += report::Overview(ctx);
  std::vector<RegionSpread> spreads;
  if (has_bilaterals) {
    const std::vector<RegionSpread>* given = ctx.in.root_spreads;
    spreads = given != nullptr && given->size() == static_cast<size_t>(ctx.survey.num_regions())
                  ? *given
              : has_summary ? result.root_spreads.regions
                            : RegionSpreads(result.bilaterals.front());
  }
  if (!ctx.order.empty()) {
    out += report::PriceLevelSection(ctx, spreads);
    if (has_contributions) out += report::ContributionSection(ctx, *ctx.in.contributions);
    out += report::AggregateSection(ctx);
    if (has_groups) out += report::GroupSection(ctx);
    out += report::MatrixSection(ctx);
  }
  out += report::CoverageSection(ctx);
  if (has_matrices) out += report::SpreadSection(ctx, result.bilaterals.front());
  if (has_summary) out += report::SpreadSection(ctx, result.root_spreads);
  if (!ctx.root.tree.empty()) out += report::TreeSection(ctx);
  if (ctx.in.outliers != nullptr) out += report::OutlierSection(ctx, *ctx.in.outliers);
  if (ctx.in.sensitivity != nullptr) out += report::SensitivitySection(ctx, *ctx.in.sensitivity);
  out += report::MethodsSection(ctx);
  out += report::CautionsSection();
  return out;
}

}  // namespace

std::vector<ReportOutlier> ToReportOutliers(const Survey& survey, const OutlierReport& report) {
  std::vector<ReportOutlier> rows;
  for (const Outlier& o : report.outliers) {
    ReportOutlier row;
    row.heading = survey.heading_codes[o.heading];
    row.region = std::string(survey.regions.Code(o.region));
    row.item = std::string(survey.items.Code(o.item));
    row.heading_label =
        survey.classification.nodes()[survey.classification.headings()[o.heading]].label;
    if (o.item < static_cast<int>(survey.item_description.size())) {
      row.item_label = survey.item_description[o.item];
    }
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

std::string HtmlEscape(std::string_view raw) {
  // Control and bidirectional-override characters are shown as visible
  // escapes first, so data can neither break the page nor reorder its text.
  const std::string text = VisibleText(raw);
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

std::string ReportHtml(const ReportInputs& inputs) {
  const bool usable = inputs.survey != nullptr && inputs.result != nullptr &&
                      !inputs.result->nodes.empty() && !inputs.survey->classification.empty();
  // The root as the page names it: its label with the code, or the code.
  std::string root_code;
  if (usable) {
    const ClassificationNode& root = inputs.survey->classification.nodes().front();
    root_code = root.label.empty() ? root.code : root.label + " (" + root.code + ")";
  }
  std::string out = PageTop(inputs, usable, root_code);
  if (!usable) {
    return out +
           "<main class=\"wrap\"><section id=\"overview\"><h2>Overview</h2><p>No parities were "
           "computed, so there is nothing to show.</p></section></main></body></html>\n";
  }
  out += Sections(MakeContext(inputs, root_code));
  out +=
      "</main>\n<footer><div class=\"wrap\">Made by paritas " PARITAS_VERSION
      ". Full results: <code>parities.csv</code>, " +
      std::string(inputs.pair_tables_written
                      ? "<code>matrix/</code>, <code>bilateral/</code>, "
                      : "") +
      "<code>run.json</code>.</div></footer>\n<script>";
  out += internal::report::kScript;
  out += "</script>\n</body></html>\n";
  return out;
}

}  // namespace paritas
