// One pair, every formula: the matched entries are gathered once into
// plain arrays and handed to the scalar formulas of index_formulas.h, so the
// figures here are by construction the ones the library documents and tests.
#include "paritas/use/pair_comparison.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "base/not_a_number.h"
#include "paritas/base/csv.h"
#include "paritas/compute/imputation.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/aggregation/index_formulas.h"
#include "paritas/elementary/elementary_method.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

constexpr int kDecimals = 6;

bool Positive(double x) { return std::isfinite(x) && x > 0; }

bool FindRegion(const Survey& survey, const std::string& code, const char* role, int* region,
                std::string* error) {
  *region = survey.regions.Find(Trim(code));
  if (*region >= 0) return true;
  *error = std::string(role) + " region '" + code + "' is not in the survey";
  const std::string nearest = NearestName(code, survey.regions.Codes());
  if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
  return false;
}

void SortContributions(std::vector<PairContribution>* contributions) {
  std::stable_sort(contributions->begin(), contributions->end(),
                   [](const PairContribution& x, const PairContribution& y) {
                     const double ax = std::abs(x.log_contribution),
                                  ay = std::abs(y.log_contribution);
                     if (ax != ay) return ax > ay;
                     return x.code < y.code;
                   });
}

void CompareAggregate(const Survey& survey, const ParityResult& result, int node, int a, int b,
                      PairComparison* out) {
  const NodeArrays arrays = NodeInputArrays(survey, result, node);
  const std::vector<int>& headings = survey.classification.nodes()[node].headings;
  std::vector<double> pa, pb, qa, qb, ea, eb;
  std::vector<int> matched;
  for (int k = 0; k < static_cast<int>(headings.size()); ++k) {
    const double price_a = arrays.price(a, k), price_b = arrays.price(b, k);
    const double spend_a = arrays.expenditure(a, k), spend_b = arrays.expenditure(b, k);
    // Zero spending on one side keeps the heading with quantity 0, as the
    // all-pairs matrices do (bilateral_matrix.h).
    const bool spends_a = std::isfinite(spend_a) && spend_a >= 0.0;
    const bool spends_b = std::isfinite(spend_b) && spend_b >= 0.0;
    if (!Positive(price_a) || !Positive(price_b) || !spends_a || !spends_b) continue;
    matched.push_back(headings[k]);
    pa.push_back(price_a);
    pb.push_back(price_b);
    ea.push_back(spend_a);
    eb.push_back(spend_b);
    qa.push_back(spend_a / price_a);
    qb.push_back(spend_b / price_b);
  }
  // A region spending nothing on every matched heading leaves no index.
  if (!Positive(std::accumulate(ea.begin(), ea.end(), 0.0)) ||
      !Positive(std::accumulate(eb.begin(), eb.end(), 0.0))) {
    matched.clear();
  }
  out->num_matched = static_cast<int>(matched.size());
  if (matched.empty()) return;
  out->laspeyres = Laspeyres(pa, pb, qa);
  out->paasche = Paasche(pa, pb, qb);
  out->fisher = Fisher(pa, pb, qa, qb);
  out->tornqvist = Tornqvist(pa, pb, qa, qb);
  out->walsh = Walsh(pa, pb, qa, qb);
  double total_a = 0.0, total_b = 0.0;
  for (size_t k = 0; k < matched.size(); ++k) {
    total_a += ea[k];
    total_b += eb[k];
  }
  out->value_ratio = total_b / total_a;
  out->implied_quantity_laspeyres = out->value_ratio / out->laspeyres;
  out->implied_quantity_paasche = out->value_ratio / out->paasche;
  out->implied_quantity_fisher = out->value_ratio / out->fisher;
  out->implied_quantity_tornqvist = out->value_ratio / out->tornqvist;
  out->implied_quantity_walsh = out->value_ratio / out->walsh;
  out->fisher_quantity = Fisher(qa, qb, pa, pb);
  out->log_spread = std::abs(std::log(out->laspeyres / out->paasche));

  std::vector<double> log_part(matched.size()), fisher_part(matched.size());
  TornqvistLogContributions(pa, pb, qa, qb, log_part);
  FisherContributions(pa, pb, qa, qb, fisher_part);
  for (size_t k = 0; k < matched.size(); ++k) {
    PairContribution c;
    c.code = survey.heading_codes[matched[k]];
    c.share_from = ea[k] / total_a;
    c.share_to = eb[k] / total_b;
    c.price_relative = pb[k] / pa[k];
    c.log_contribution = log_part[k];
    c.fisher_contribution = fisher_part[k];
    out->contributions.push_back(std::move(c));
  }
}

// Names the regions whose parity at `heading` is external or imputed.
std::string SourceNote(const Survey& survey, const ParityResult& result, int heading, int a,
                       int b) {
  if (result.heading_source.cols() <= heading) return "";
  std::string note;
  for (int r : {a, b}) {
    const auto source = static_cast<ParitySource>(result.heading_source(r, heading));
    if (source == ParitySource::kPriced || (r == b && a == b)) continue;
    note += (note.empty() ? "" : "; ") + std::string("the parity of '") +
            std::string(survey.regions.Code(r)) + "' is " + ToString(source) +
            (source == ParitySource::kExternal ? " (" + survey.external_path + ")" : "");
  }
  if (note.empty()) return "";
  return note + ": the items compared below do not give the transitive parity";
}

void CompareHeading(const Survey& survey, int heading, int a, int b, PairComparison* out) {
  const HeadingRange& range = survey.heading_range[heading];
  const CellPrices& cells = survey.cells;
  // Cells are sorted by item, then region: one pass pairs each item's cells.
  std::vector<double> pa, pb;
  std::vector<int> items;
  int64_t k = range.cell_begin;
  while (k < range.cell_end) {
    const int item = cells.item[k];
    double price_a = kNaN, price_b = kNaN;
    for (; k < range.cell_end && cells.item[k] == item; ++k) {
      if (cells.region[k] == a) price_a = std::exp(cells.log_price[k]);
      if (cells.region[k] == b) price_b = std::exp(cells.log_price[k]);
    }
    if (!Positive(price_a) || !Positive(price_b)) continue;
    items.push_back(item);
    pa.push_back(price_a);
    pb.push_back(price_b);
  }
  out->num_matched = static_cast<int>(items.size());
  if (items.empty()) return;
  out->jevons = Jevons(pa, pb);
  out->dutot = Dutot(pa, pb);
  out->carli = Carli(pa, pb);
  const double n = static_cast<double>(items.size());
  for (size_t i = 0; i < items.size(); ++i) {
    PairContribution c;
    c.code = std::string(survey.items.Code(items[i]));
    c.share_from = kNaN;
    c.share_to = kNaN;
    c.price_relative = pb[i] / pa[i];
    c.log_contribution = std::log(c.price_relative) / n;
    c.fisher_contribution = kNaN;
    out->contributions.push_back(std::move(c));
  }
}

void AddRow(const std::string& measure, double value, std::string* out) {
  AppendCsvField(measure, out);
  *out += ',';
  AppendShortest(value, out);
  *out += '\n';
}

void AddTextRow(const std::string& measure, const std::string& value, std::string* out) {
  AppendCsvField(measure, out);
  *out += ',';
  AppendCsvField(value, out);
  *out += '\n';
}

std::string Pad(const std::string& text, size_t width, bool right = false) {
  if (text.size() >= width) return text;
  const std::string fill(width - text.size(), ' ');
  return right ? fill + text : text + fill;
}

std::string Number(double value) {
  return std::isnan(value) ? std::string("-") : FormatReadable(value, kDecimals);
}

bool ExcludesOne(const PairComparison& c) { return c.ratio_lower > 1.0 || c.ratio_upper < 1.0; }

// The interval of the transitive ratio from the sensitivity run, or why none
// is shown.
std::string RatioIntervalLines(const PairComparison& c) {
  if (std::isfinite(c.ratio_lower)) {
    const std::string verdict = c.ratio_lower > 1.0   ? "'" + c.to + "' is dearer than '" + c.from + "'"
                                : c.ratio_upper < 1.0 ? "'" + c.to + "' is cheaper than '" + c.from + "'"
                                                      : "the two cannot be told apart";
    return "\n  " + FormatShareAsPercent(c.ratio_level) + " % interval of the transitive ratio: " +
           Number(c.ratio_lower) + " - " + Number(c.ratio_upper) + "\n  excludes 1: " +
           (ExcludesOne(c) ? "yes" : "no") + " (" + verdict + ")\n  (from the " +
           std::to_string(c.ratio_num_replicates) + " bootstrap replicates of sensitivity run " +
           c.ratio_run_id + ", " + c.ratio_source + ")\n";
  }
  if (c.ratio_note.empty()) return "";
  return "\n  interval of the transitive ratio: not shown: " + c.ratio_note + "\n";
}

}  // namespace

bool ComparePair(const Survey& survey, const ParityResult& result, const std::string& from,
                 const std::string& to, const std::string& node, PairComparison* comparison,
                 std::string* error) {
  *comparison = PairComparison();
  const Classification& tree = survey.classification;
  if (tree.empty() || result.nodes.size() != tree.nodes().size()) {
    *error = "no parities computed for this survey";
    return false;
  }
  int a = -1, b = -1;
  if (!FindRegion(survey, from, "from", &a, error) || !FindRegion(survey, to, "to", &b, error))
    return false;
  const int index = node.empty() ? 0 : tree.FindNode(std::string(Trim(node)));
  if (index < 0) {
    *error = "node '" + node + "' is not in the classification";
    const std::string nearest = NearestName(node, tree.NodeCodes());
    if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
    return false;
  }
  PairComparison& out = *comparison;
  const NodeResult& node_result = result.nodes[index];
  out.node = tree.nodes()[index].code;
  out.node_label = tree.nodes()[index].label;
  out.is_heading = node_result.is_heading;
  out.is_group = tree.nodes()[index].is_group;
  out.from = std::string(survey.regions.Code(a));
  out.to = std::string(survey.regions.Code(b));
  out.jevons = out.dutot = out.carli = kNaN;
  out.laspeyres = out.paasche = out.fisher = out.tornqvist = out.walsh = out.value_ratio = kNaN;
  out.implied_quantity_laspeyres = out.implied_quantity_paasche = out.implied_quantity_fisher =
      kNaN;
  out.implied_quantity_tornqvist = out.implied_quantity_walsh = out.fisher_quantity =
      out.log_spread = kNaN;
  if (out.is_heading) {
    CompareHeading(survey, node_result.heading, a, b, &out);
  } else {
    CompareAggregate(survey, result, index, a, b, &out);
  }
  if (out.is_heading) out.source_note = SourceNote(survey, result, node_result.heading, a, b);
  if (out.num_matched == 0 && out.source_note.empty()) {
    *error = out.is_heading
                 ? "regions '" + out.from + "' and '" + out.to + "' priced no item of heading '" +
                       out.node + "' in common"
                 : "regions '" + out.from + "' and '" + out.to + "' have no basic heading of '" +
                       out.node + "' with a parity and positive expenditure in both";
    return false;
  }
  out.transitive = node_result.parity(b) / node_result.parity(a);
  out.log_gap = std::log((out.is_heading ? out.jevons : out.fisher) / out.transitive);
  SortContributions(&out.contributions);
  return true;
}

void TransitiveUnderEveryMethod(const Survey& survey, const ComputeOptions& options,
                                PairComparison* comparison) {
  const int node = survey.classification.FindNode(comparison->node);
  const int a = survey.regions.Find(comparison->from), b = survey.regions.Find(comparison->to);
  std::vector<std::string> names =
      comparison->is_heading ? ElementaryMethodNames() : AggregationMethodNames();
  comparison->by_method.clear();
  for (const std::string& name : names) {
    ComputeOptions method_options = options;
    if (comparison->is_heading) {
      method_options.elementary.method = name;
    } else {
      method_options.aggregation = name;
    }
    method_options.elementary.robust_errors = RobustErrors::kOff;
    method_options.keep_bilaterals.clear();
    ParityResult result;
    ComputeSummary summary;
    MethodTransitive entry{name, kNaN, ""};
    if (ComputeParities(survey, method_options, &result, &summary)) {
      const Eigen::VectorXd& parity = result.nodes[node].parity;
      entry.transitive = parity(b) / parity(a);
    } else {
      entry.failure = summary.message;
    }
    comparison->by_method.push_back(std::move(entry));
  }
}

std::string PairCsv(const PairComparison& c) {
  std::string out = "measure,value\n";
  AddTextRow("from", c.from, &out);
  AddTextRow("to", c.to, &out);
  AddTextRow("node", c.node, &out);
  if (!c.node_label.empty()) AddTextRow("node_label", c.node_label, &out);
  if (!c.source_note.empty()) AddTextRow("source_note", c.source_note, &out);
  if (c.is_heading) {
    AddTextRow("num_items", std::to_string(c.num_matched), &out);
    AddRow("jevons", c.jevons, &out);
    AddRow("dutot", c.dutot, &out);
    AddRow("carli", c.carli, &out);
  } else {
    AddTextRow("num_headings", std::to_string(c.num_matched), &out);
    AddRow("laspeyres", c.laspeyres, &out);
    AddRow("paasche", c.paasche, &out);
    AddRow("fisher", c.fisher, &out);
    AddRow("tornqvist", c.tornqvist, &out);
    AddRow("walsh", c.walsh, &out);
    AddRow("value_ratio", c.value_ratio, &out);
    AddRow("implied_quantity_laspeyres", c.implied_quantity_laspeyres, &out);
    AddRow("implied_quantity_paasche", c.implied_quantity_paasche, &out);
    AddRow("implied_quantity_fisher", c.implied_quantity_fisher, &out);
    AddRow("implied_quantity_tornqvist", c.implied_quantity_tornqvist, &out);
    AddRow("implied_quantity_walsh", c.implied_quantity_walsh, &out);
    AddRow("fisher_quantity", c.fisher_quantity, &out);
    AddRow("log_spread", c.log_spread, &out);
  }
  AddRow("transitive", c.transitive, &out);
  AddRow("log_gap", c.log_gap, &out);
  if (std::isfinite(c.ratio_lower)) {
    AddRow("ratio_level", c.ratio_level, &out);
    AddRow("ratio_lower", c.ratio_lower, &out);
    AddRow("ratio_upper", c.ratio_upper, &out);
    AddTextRow("ratio_excludes_one", ExcludesOne(c) ? "yes" : "no", &out);
    AddTextRow("ratio_run_id", c.ratio_run_id, &out);
  }
  const std::string log_name =
      c.is_heading ? "jevons_log_contribution:" : "tornqvist_log_contribution:";
  for (const PairContribution& part : c.contributions)
    AddRow(log_name + part.code, part.log_contribution, &out);
  if (!c.is_heading) {
    std::vector<PairContribution> by_fisher = c.contributions;
    std::stable_sort(by_fisher.begin(), by_fisher.end(),
                     [](const PairContribution& x, const PairContribution& y) {
                       const double ax = std::abs(x.fisher_contribution),
                                    ay = std::abs(y.fisher_contribution);
                       if (ax != ay) return ax > ay;
                       return x.code < y.code;
                     });
    for (const PairContribution& part : by_fisher) {
      AddRow("fisher_contribution:" + part.code, part.fisher_contribution, &out);
    }
  }
  for (const MethodTransitive& m : c.by_method) {
    AddRow("transitive_by_method:" + m.method, m.transitive, &out);
  }
  return out;
}

std::string PairTable(const PairComparison& c) {
  const std::string kind = c.is_heading ? "basic heading, "
                           : c.is_group ? "group, "
                                        : "aggregate, ";
  std::string out = "'" + c.to + "' relative to '" + c.from + "' at '" + c.node + "'" +
                    (c.node_label.empty() ? "" : " (" + VisibleText(c.node_label) + ")") + " (" +
                    kind + std::to_string(c.num_matched) + (c.is_heading ? " items" : " headings") +
                    " priced in both)\n\n";
  if (!c.source_note.empty()) out += "  note: " + c.source_note + "\n\n";
  auto row = [&](const std::string& name, double value, const std::string& note) {
    out += "  " + Pad(name, 28) + Pad(Number(value), 12, true);
    if (!note.empty()) out += "  " + note;
    out += "\n";
  };
  if (c.is_heading) {
    out += "  " + Pad("formula", 28) + Pad("price index", 12, true) + "\n";
    row("Jevons", c.jevons, "geometric mean of price relatives");
    row("Dutot", c.dutot, "ratio of average prices");
    row("Carli", c.carli, "average of price relatives");
    row("transitive (compute)", c.transitive, "parity(" + c.to + ") / parity(" + c.from + ")");
    row("gap ln(Jevons / transitive)", c.log_gap, "");
  } else {
    out +=
        "  " + Pad("formula", 28) + Pad("price index", 12, true) + Pad("quantity", 12, true) + "\n";
    auto pair_row = [&](const std::string& name, double price, double quantity) {
      out += "  " + Pad(name, 28) + Pad(Number(price), 12, true) + Pad(Number(quantity), 12, true) +
             "\n";
    };
    pair_row("Laspeyres", c.laspeyres, c.implied_quantity_laspeyres);
    pair_row("Paasche", c.paasche, c.implied_quantity_paasche);
    pair_row("Fisher", c.fisher, c.implied_quantity_fisher);
    pair_row("Tornqvist", c.tornqvist, c.implied_quantity_tornqvist);
    pair_row("Walsh", c.walsh, c.implied_quantity_walsh);
    out += "  (quantity = value ratio / price index: the volume of '" + c.to + "' relative to '" +
           c.from + "')\n";
    row("value ratio", c.value_ratio, "expenditure of " + c.to + " / expenditure of " + c.from);
    // Percent, the unit of compute's table and the report; the CSV keeps log_spread.
    row("P-L spread, %", 100.0 * c.log_spread, "100 x |ln(Laspeyres / Paasche)|");
    row("transitive (compute)", c.transitive, "parity(" + c.to + ") / parity(" + c.from + ")");
    row("gap ln(Fisher / transitive)", c.log_gap, "");
  }
  out += RatioIntervalLines(c);
  if (!c.by_method.empty()) {
    out += std::string("\ntransitive parity under every ") +
           (c.is_heading ? "elementary" : "aggregation") + " method:\n";
    for (const MethodTransitive& m : c.by_method) {
      row(m.method, m.transitive,
          m.failure.empty() ? "" : "failed: " + m.failure.substr(0, m.failure.find('\n')));
    }
  }
  if (c.contributions.empty()) return out;
  out += "\nwhat drives the comparison, largest first:\n";
  const std::string what = c.is_heading ? "item" : "heading";
  size_t width = what.size();
  for (const PairContribution& part : c.contributions) width = std::max(width, part.code.size());
  width = std::min<size_t>(width, 40) + 2;
  if (c.is_heading) {
    out += "  " + Pad(what, width) + Pad("relative", 12, true) + Pad("ln-Jevons", 12, true) + "\n";
    for (const PairContribution& part : c.contributions) {
      out += "  " + Pad(part.code, width) + Pad(Number(part.price_relative), 12, true) +
             Pad(Number(part.log_contribution), 12, true) + "\n";
    }
    out += "  (ln-Jevons: ln(relative) / items; they add up to ln Jevons)\n";
    return out;
  }
  out += "  " + Pad(what, width) + Pad("share " + c.from, 12, true) +
         Pad("share " + c.to, 12, true) + Pad("relative", 12, true) +
         Pad("ln-Tornqvist", 14, true) + Pad("Fisher", 12, true) + "\n";
  for (const PairContribution& part : c.contributions) {
    out += "  " + Pad(part.code, width) + Pad(Number(part.share_from), 12, true) +
           Pad(Number(part.share_to), 12, true) + Pad(Number(part.price_relative), 12, true) +
           Pad(Number(part.log_contribution), 14, true) +
           Pad(Number(part.fisher_contribution), 12, true) + "\n";
  }
  out +=
      "  (ln-Tornqvist contributions add up to ln Tornqvist; Fisher contributions, the additive\n"
      "   decomposition of Reinsdorf, Diewert and Ehemann (2002), add up to Fisher - 1)\n";
  return out;
}

}  // namespace paritas
