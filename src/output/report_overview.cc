// The report's overview: the survey in numbers, the headline comparison,
// the run's settings, the input files and every warning.
#include <algorithm>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/base/text.h"

namespace paritas::internal::report {

namespace {

// The survey in numbers, and the dearest region against the cheapest.
std::string Headline(const Context& ctx) {
  const Survey& s = ctx.survey;
  int num_aggregates = 0, num_groups = 0;
  for (const ClassificationNode& node : s.classification.nodes()) {
    num_groups += node.is_group ? 1 : 0;
    num_aggregates += node.is_leaf || node.is_group ? 0 : 1;
  }
  const double possible = static_cast<double>(s.num_regions()) * s.num_items();
  const double coverage = possible > 0 ? static_cast<double>(s.cells.size()) / possible : kNaN;
  std::string out = "<div class=\"cards\">";
  out += Card(FormatCount(s.num_regions()), "regions");
  out += Card(FormatCount(s.num_headings()), "basic headings");
  out += Card(FormatCount(num_aggregates), "aggregates");
  if (num_groups > 0) out += Card(FormatCount(num_groups), "groups");
  out += Card(FormatCount(s.num_items()), "items");
  out += Card(FormatCount(s.num_quotes), "price quotes");
  out += Card(FormatCount(static_cast<int64_t>(s.cells.size())), "priced cells");
  out += Card(Percent(coverage, 1), "region \xC3\x97 item coverage");
  out += "</div>\n";

  if (!ctx.order.empty()) {
    const int dear = ctx.order.front(), cheap = ctx.order.back();
    out += "<p class=\"lead\">Across the " + FormatCount(static_cast<int64_t>(ctx.order.size())) +
           " regions with a price level for <b>" + HtmlEscape(ctx.root_code) +
           "</b>, the dearest is <b>" + HtmlEscape(ctx.Label(dear)) + "</b> at " +
           Num(ctx.root.parity(dear), kChartParityDecimals) + " and the cheapest <b>" +
           HtmlEscape(ctx.Label(cheap)) + "</b> at " +
           Num(ctx.root.parity(cheap), kChartParityDecimals) + " (" +
           HtmlEscape(ctx.root.reference_used) + " = 100): the same basket costs " +
           Num(ctx.root.parity(dear) / ctx.root.parity(cheap), 2) +
           " times as much in one as in the other.</p>\n";
  }
  return out;
}

// The run's settings and what it left out, as a two-column table.
std::string Facts(const Context& ctx) {
  std::string out = "<table class=\"facts\"><tbody>";
  auto fact = [&](const std::string& key, const std::string& value) {
    out += "<tr><th scope=\"row\">" + key + "</th><td>" + value + "</td></tr>";
  };
  if (ctx.in.config != nullptr) {
    const RunConfig& c = *ctx.in.config;
    fact("Basic headings",
         HtmlEscape(c.elementary) + " (parities within each heading from item prices)");
    fact("Aggregates",
         HtmlEscape(c.aggregation) + " (headings combined with expenditure weights)");
    fact("Reference", HtmlEscape(c.reference.ToString()) + " = 100" +
                          (ctx.root.reference_used != c.reference.ToString()
                               ? " (used: " + HtmlEscape(ctx.root.reference_used) + ")"
                               : std::string()) +
                          "<br><small>" +
                          HtmlEscape(ReferenceConvention(ctx.root.reference_used)) +
                          "</small>");
    if (c.representative_weight != 1.0) {
      fact("Representative items", "weight " + Num(c.representative_weight, 2) + " in CPD");
    }
    fact("Expenditure weights",
         ctx.survey.national_weights
             ? "national: one basket for every region, valued at each region's heading parities "
               "(regional nominal and real expenditure are not computed)"
             : "regional: each region's own spending");
    if (!ctx.survey.cells.weight.empty()) {
      fact("Quote weights",
           std::string("weighted geometric means in the cells; CPD cells ") +
               (c.cpd_cell_weights == CpdCellWeights::kQuoteWeights
                    ? "weighted by their sums of quote weights"
                    : "weigh alike"));
    }
    fact("Invalid rows", HtmlEscape(ToString(c.invalid_rows)));
    if (!c.config_path.empty()) {
      fact("Configuration", "<code>" + HtmlEscape(c.config_path) + "</code>");
    }
  } else {
    fact("Reference", HtmlEscape(ReferenceConvention(ctx.root.reference_used)));
  }
  if (ctx.in.compute != nullptr) {
    fact("Headings with parities", FormatCount(ctx.in.compute->num_headings_used) + " of " +
                                       FormatCount(ctx.in.compute->num_headings_given));
  }
  if (!ctx.missing.empty()) {
    std::string codes;
    for (size_t i = 0; i < ctx.missing.size() && i < 20; ++i) {
      codes += (i ? ", " : "") + HtmlEscape(ctx.Code(ctx.missing[i]));
    }
    if (ctx.missing.size() > 20) codes += ", \xE2\x80\xA6";
    fact("Regions without a price level",
         FormatCount(static_cast<int64_t>(ctx.missing.size())) + ": " + codes);
  }
  out += "</tbody></table>\n";
  return out;
}

// The input files with their row counts and digests ("" when not loaded).
std::string InputFiles(const Context& ctx) {
  if (ctx.in.load == nullptr || ctx.in.load->files.empty()) return "";
  std::string out =
      "<h3>Input files</h3><div class=\"table-scroll\"><table "
      "class=\"data\"><thead><tr><th>file</th><th>path</th><th "
      "class=\"num\">rows read</th><th class=\"num\">used</th><th "
      "class=\"num\">rejected</th><th>SHA-256</th></tr></thead><tbody>";
  for (const InputFileSummary& f : ctx.in.load->files) {
    if (!f.given) continue;
    std::string mapped;
    for (const auto& [ours, header] : f.columns) {
      mapped += (mapped.empty() ? "<br><small>columns: " : ", ") + HtmlEscape(ours) +
                " from <code>" + HtmlEscape(header) + "</code>";
    }
    if (!mapped.empty()) mapped += "</small>";
    out += "<tr><td>" + HtmlEscape(f.role) + "</td><td><code>" + HtmlEscape(f.path) + "</code>" +
           mapped + "</td><td class=\"num\">" + FormatCount(f.rows_read) +
           "</td><td class=\"num\">" +
           FormatCount(f.rows_used) + "</td><td class=\"num\">" + FormatCount(f.rows_rejected) +
           "</td><td><code title=\"" + HtmlEscape(f.sha256) + "\">" +
           HtmlEscape(f.sha256.substr(0, 12)) + "\xE2\x80\xA6</code></td></tr>";
  }
  out += "</tbody></table></div>\n";
  return out;
}

// Warnings: counts per kind, then the sentences (the first 50; all are in
// warnings.csv).
std::string Warnings(const Context& ctx) {
  const std::vector<RunWarning>& warnings = ctx.in.warnings;
  std::string out = "<h3 id=\"warnings\">Warnings</h3>";
  if (warnings.empty()) return out + "<p>None.</p>\n";
  out += "<p>" + FormatCount(static_cast<int64_t>(warnings.size())) +
         (warnings.size() == 1 ? " warning: " : " warnings: ");
  bool first = true;
  for (const auto& [kind, count] : CountWarnings(warnings)) {
    out += std::string(first ? "" : ", ") + HtmlEscape(WarningLabel(kind)) + " " +
           FormatCount(count);
    first = false;
  }
  out += ". Regions with a warning on the total are marked &#9888; in the price level table; "
         "the tooltips of the aggregate grid name the warnings of each cell.</p>\n";
  constexpr size_t kMaxWarnings = 50;
  out += "<ul class=\"warnings\">";
  for (size_t i = 0; i < warnings.size() && i < kMaxWarnings; ++i) {
    out += "<li><b>" + HtmlEscape(WarningLabel(warnings[i].kind)) + "</b>: " +
           HtmlEscape(warnings[i].text) + "</li>";
  }
  if (warnings.size() > kMaxWarnings) {
    out += "<li>and " + FormatCount(static_cast<int64_t>(warnings.size() - kMaxWarnings)) +
           " more (every one is in warnings.csv)</li>";
  }
  out += "</ul>\n";
  return out;
}

}  // namespace

std::string Overview(const Context& ctx) {
  return OpenSection("overview", "Overview") + Headline(ctx) + Facts(ctx) + InputFiles(ctx) +
         Warnings(ctx) + "</section>\n";
}

}  // namespace paritas::internal::report
