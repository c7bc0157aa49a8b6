// Large tables (a million bilateral pairs at 1,000 regions) are formatted in
// row blocks in parallel and joined in order, so the text is the same for any
// number of threads. Numbers go through std::to_chars: locale-free and
// byte-identical across runs.
#include "paritas/output/output_writers.h"

#include <omp.h>
#include <unistd.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>

#include "paritas/aggregation/aggregation.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "base/median.h"
#include "base/sha256.h"
#include "output/format_rows.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;

using internal::FormatRowBlocks;
using internal::FormatRows;

constexpr int64_t kRowsPerBlock = 4096;

std::vector<int> RegionsWithParity(const NodeResult& node) {
  std::vector<int> regions;
  for (int r = 0; r < node.parity.size(); ++r) {
    if (std::isfinite(node.parity(r))) regions.push_back(r);
  }
  return regions;
}

void AppendCode(std::string_view code, std::string* out) { AppendCsvField(code, out); }

// CSV fields of the region codes, escaped once rather than once per row.
std::vector<std::string> RegionFields(const Survey& survey) {
  std::vector<std::string> fields(survey.num_regions());
  for (int r = 0; r < survey.num_regions(); ++r) AppendCode(survey.regions.Code(r), &fields[r]);
  return fields;
}

}  // namespace

std::string NodeFileName(const std::string& code) {
  static const char* kHex = "0123456789ABCDEF";
  std::string name;
  for (size_t i = 0; i < code.size(); ++i) {
    const unsigned char c = static_cast<unsigned char>(code[i]);
    const bool keep = std::isalnum(c) || c == '-' || c == '_' || (c == '.' && i > 0);
    if (keep) {
      name += static_cast<char>(c);
    } else {
      name += '%';
      name += kHex[c >> 4];
      name += kHex[c & 15];
    }
  }
  if (name.empty()) return "%";
  if (name.size() <= kMaxNodeFileNameBytes) return name;
  // Too long for a file name: a prefix and the code's SHA-256. "%~" is never
  // produced above ('~' is escaped), so these names meet no other.
  return name.substr(0, kMaxNodeFileNameBytes - 66) + "%~" + internal::Sha256Hex(code);
}

std::string NodeTitle(const Classification& classification, int node) {
  const ClassificationNode& n = classification.nodes()[node];
  std::string title = "'" + n.code + "'";
  if (!n.label.empty()) title += " (" + VisibleText(n.label) + ")";
  return title;
}

std::string ParitiesCsv(const Survey& survey, const ParityResult& result,
                        const PlausibilityResult* plausibility,
                        const std::string& extrapolated_to) {
  internal::JoinedText text;
  ParitiesCsvBlocks(survey, result, plausibility, extrapolated_to, text.Sink());
  return text.Take();
}

void ParitiesCsvBlocks(const Survey& survey, const ParityResult& result,
                       const PlausibilityResult* plausibility, const std::string& extrapolated_to,
                       const TextBlocks& emit) {
  const int num_regions = survey.num_regions();
  const int64_t num_rows = static_cast<int64_t>(result.nodes.size()) * num_regions;
  const auto& tree = survey.classification.nodes();
  const std::vector<std::string> region_fields = RegionFields(survey);
  // Results built without the imputation stage count every parity as priced.
  Eigen::MatrixXi source = result.heading_source;
  if (source.rows() != num_regions || source.cols() != survey.num_headings()) {
    source = Eigen::MatrixXi::Zero(num_regions, survey.num_headings());
    for (const NodeResult& node : result.nodes) {
      if (!node.is_heading) continue;
      for (int r = 0; r < num_regions; ++r) {
        if (std::isfinite(node.parity(r))) {
          source(r, node.heading) = static_cast<int>(ParitySource::kPriced);
        }
      }
    }
  }
  // "node,kind," and ",label" of each node, escaped once. The label comes
  // after the counts, so the columns before it keep their places.
  std::vector<std::string> node_fields(tree.size()), label_fields(tree.size());
  for (size_t n = 0; n < tree.size(); ++n) {
    AppendCode(tree[n].code, &node_fields[n]);
    node_fields[n] += tree[n].is_leaf ? ",heading," : tree[n].is_group ? ",group," : ",aggregate,";
    label_fields[n] += ',';
    AppendCsvField(tree[n].label, &label_fields[n]);
  }
  std::string extrapolated_field;
  AppendCsvField(extrapolated_to, &extrapolated_field);
  FormatRowBlocks(
      num_rows, kRowsPerBlock, 160,
      [&](int64_t row, std::string* out) {
        const NodeResult& node = result.nodes[row / num_regions];
        const int r = static_cast<int>(row % num_regions);
        *out += node_fields[node.node];
        *out += region_fields[r];
        *out += ',';
        AppendShortest(node.parity(r), out);
        *out += ',';
        AppendShortest(node.expenditure(r), out);
        *out += ',';
        AppendShortest(node.real_expenditure(r), out);
        *out += ',';
        AppendShortest(node.real_per_capita_index(r), out);
        *out += ',';
        AppendShortest(node.log_se(r), out);
        *out += ',';
        AppendShortest(node.log_se_robust(r), out);
        *out += ',';
        if (node.rank(r) > 0) AppendInteger(node.rank(r), out);
        *out += ',';
        AppendInteger(node.num_items(r), out);
        *out += ',';
        AppendInteger(node.num_quotes(r), out);
        *out += ',';
        AppendInteger(node.num_headings(r), out);
        const Eigen::Vector4d shares =
            SourceShares(survey.classification, node.node, r, survey.expenditure, source);
        *out += ',';
        *out += node.is_heading ? ToString(static_cast<ParitySource>(source(r, node.heading)))
                                : SourceLabel(shares);
        for (int k = 0; k < 3; ++k) {
          *out += ',';
          AppendShortest(shares(k), out);
        }
        *out += label_fields[node.node];
        if (plausibility != nullptr) {
          *out += ',';
          AppendShortest(plausibility->basket_share(node.node, r), out);
          *out += ',';
          AppendCsvField(plausibility->node_region_kinds[node.node][r], out);
        }
        if (!extrapolated_to.empty()) {
          *out += ',';
          *out += extrapolated_field;
        }
        *out += '\n';
      },
      std::string("node,kind,region,parity,expenditure,real_expenditure,real_per_capita_index,"
                  "log_se,log_se_robust,rank,num_items,num_quotes,num_headings,source,"
                  "share_priced,share_imputed,share_external,label") +
          (plausibility != nullptr ? ",basket_share,warnings" : "") +
          (extrapolated_to.empty() ? "\n" : ",extrapolated_to\n"),
      emit);
}

std::string ParityMatrixCsv(const Survey& survey, const NodeResult& node) {
  internal::JoinedText text;
  ParityMatrixCsvBlocks(survey, node, text.Sink());
  return text.Take();
}

void ParityMatrixCsvBlocks(const Survey& survey, const NodeResult& node, const TextBlocks& emit) {
  const std::vector<int> regions = RegionsWithParity(node);
  std::string header = "region";
  for (int r : regions) {
    header += ',';
    AppendCode(survey.regions.Code(r), &header);
  }
  header += '\n';
  const std::vector<std::string> region_fields = RegionFields(survey);
  // Rows are long (one cell per region), so blocks are a few rows each.
  constexpr int64_t kMatrixRowsPerBlock = 8;
  FormatRowBlocks(
      static_cast<int64_t>(regions.size()), kMatrixRowsPerBlock, 12 * (regions.size() + 1),
      [&](int64_t row, std::string* out) {
        const int a = regions[row];
        *out += region_fields[a];
        for (int b : regions) {
          *out += ',';
          AppendShortest(100.0 * node.parity(b) / node.parity(a), out);
        }
        *out += '\n';
      },
      header, emit);
}

Eigen::MatrixXd ParityMatrix(const NodeResult& node, std::vector<int>* regions) {
  *regions = RegionsWithParity(node);
  const int n = static_cast<int>(regions->size());
  Eigen::MatrixXd matrix(n, n);
  for (int j = 0; j < n; ++j) {
    for (int i = 0; i < n; ++i) {
      // The expression ParityMatrixCsv writes, so the bits agree.
      matrix(i, j) = 100.0 * node.parity((*regions)[j]) / node.parity((*regions)[i]);
    }
  }
  return matrix;
}

std::string AggregateBilateralCsv(const Survey& survey, const NodeResult& node,
                                  const BilateralMatrices& bilaterals) {
  internal::JoinedText text;
  AggregateBilateralCsvBlocks(survey, node, bilaterals, text.Sink());
  return text.Take();
}

void AggregateBilateralCsvBlocks(const Survey& survey, const NodeResult& node,
                                 const BilateralMatrices& bilaterals, const TextBlocks& emit) {
  const std::vector<int> regions = RegionsWithParity(node);
  const int64_t n = static_cast<int64_t>(regions.size());
  const std::vector<std::string> region_fields = RegionFields(survey);
  FormatRowBlocks(
      n * n, kRowsPerBlock, 80,
      [&](int64_t row, std::string* out) {
        const int a = regions[row / n], b = regions[row % n];
        if (a == b) return;
        *out += region_fields[a];
        *out += ',';
        *out += region_fields[b];
        const double laspeyres = bilaterals.laspeyres(a, b), paasche = bilaterals.paasche(a, b);
        for (double value : {laspeyres, paasche, bilaterals.fisher(a, b), bilaterals.tornqvist(a, b),
                             std::abs(std::log(laspeyres / paasche))}) {
          *out += ',';
          AppendShortest(value, out);
        }
        *out += ',';
        AppendInteger(bilaterals.num_matched(a, b), out);
        *out += '\n';
      },
      "from,to,laspeyres,paasche,fisher,tornqvist,spread,num_headings\n", emit);
}

std::string TreeCsv(const Survey& survey, const NodeResult& node) {
  std::string out = "from,to,spread_percent,fisher\n";
  for (const TreeEdge& edge : node.tree) {
    AppendCode(survey.regions.Code(edge.from), &out);
    out += ',';
    AppendCode(survey.regions.Code(edge.to), &out);
    out += ',';
    AppendShortest(100.0 * edge.spread, &out);
    out += ',';
    AppendShortest(edge.fisher, &out);
    out += '\n';
  }
  return out;
}

std::string HeadingBilateralCsv(const Survey& survey, const NodeResult& node,
                                const Eigen::MatrixXd& jevons, const Eigen::MatrixXi& num_items) {
  internal::JoinedText text;
  HeadingBilateralCsvBlocks(survey, node, jevons, num_items, text.Sink());
  return text.Take();
}

void HeadingBilateralCsvBlocks(const Survey& survey, const NodeResult& node, const Eigen::MatrixXd& jevons,
                               const Eigen::MatrixXi& num_items, const TextBlocks& emit) {
  const std::vector<int> regions = RegionsWithParity(node);
  const int64_t n = static_cast<int64_t>(regions.size());
  const std::vector<std::string> region_fields = RegionFields(survey);
  FormatRowBlocks(
      n * n, kRowsPerBlock, 40,
      [&](int64_t row, std::string* out) {
        const int a = regions[row / n], b = regions[row % n];
        if (a == b) return;
        *out += region_fields[a];
        *out += ',';
        *out += region_fields[b];
        *out += ',';
        AppendShortest(jevons(a, b), out);
        *out += ',';
        AppendInteger(num_items(a, b), out);
        *out += '\n';
      },
      "from,to,jevons,num_items\n", emit);
}

std::string RealByHeadingCsv(const Survey& survey, const ParityResult& result,
                             const AggregationMethod& method) {
  struct Row {
    int node, region, heading;
    double real;
    bool priced;
  };
  std::vector<Row> rows;
  const auto& tree = survey.classification.nodes();
  for (const NodeResult& node : result.nodes) {
    if (node.is_heading || node.parity.size() == 0) continue;
    const NodeArrays arrays = NodeInputArrays(survey, result, node.node);
    const Eigen::MatrixXd real =
        RealByHeading(arrays, (node.parity.array() / 100.0).log().matrix(), method);
    for (Eigen::Index r = 0; r < real.rows(); ++r) {
      for (Eigen::Index k = 0; k < real.cols(); ++k) {
        if (!std::isfinite(real(r, k))) continue;
        const double p = arrays.price(r, k), e = arrays.expenditure(r, k);
        rows.push_back({node.node, static_cast<int>(r), tree[node.node].headings[k], real(r, k),
                        std::isfinite(p) && p > 0 && e > 0});
      }
    }
  }
  const std::vector<std::string> region_fields = RegionFields(survey);
  return FormatRows(
      static_cast<int64_t>(rows.size()), kRowsPerBlock, 64,
      [&](int64_t row, std::string* out) {
        const Row& x = rows[row];
        AppendCode(tree[x.node].code, out);
        *out += ',';
        *out += region_fields[x.region];
        *out += ',';
        AppendCode(survey.heading_codes[x.heading], out);
        *out += ',';
        AppendShortest(x.real, out);
        *out += x.priced ? ",international_price\n" : ",node_parity\n";
      },
      "node,region,heading,real_expenditure,valued_at\n");
}

std::string RepresentativityCsv(const Survey& survey, const ParityResult& result) {
  std::string out = "heading,effect,log_se,num_cells,num_cells_representative\n";
  for (const HeadingParities& h : result.headings) {
    if (h.num_cells == 0 || !h.identified) continue;
    AppendCode(survey.heading_codes[h.heading], &out);
    out += ',';
    if (std::isfinite(h.representativity_effect)) AppendShortest(h.representativity_effect, &out);
    out += ',';
    if (std::isfinite(h.representativity_se)) AppendShortest(h.representativity_se, &out);
    out += ',';
    AppendInteger(h.num_cells, &out);
    out += ',';
    AppendInteger(h.num_cells_representative, &out);
    out += '\n';
  }
  return out;
}

namespace {

// Region a's spreads against every other region (row a of `spread`);
// `values` is a buffer.
RegionSpread RowSpread(const Eigen::MatrixXd& spread, int a, std::vector<double>* values) {
  RegionSpread out;
  values->clear();
  for (int b = 0; b < spread.cols(); ++b) {
    if (a == b || !std::isfinite(spread(a, b))) continue;
    values->push_back(spread(a, b));
    if (spread(a, b) > out.max || out.worst_partner < 0) {
      out.max = spread(a, b);
      out.worst_partner = b;
    }
  }
  if (values->empty()) {
    out.median = std::nan("");
    out.max = std::nan("");
    return out;
  }
  out.median = MedianInPlace(values);
  return out;
}

}  // namespace

std::vector<RegionSpread> RegionSpreads(const BilateralMatrices& bilaterals) {
  const int n = static_cast<int>(bilaterals.laspeyres.rows());
  const Eigen::MatrixXd spread =
      (bilaterals.laspeyres.array() / bilaterals.paasche.array()).log().abs().matrix();
  std::vector<RegionSpread> out(n);
  // Rows are independent; each thread has its own buffer.
#pragma omp parallel if (n > 256)
  {
    std::vector<double> values;
#pragma omp for schedule(static)
    for (int a = 0; a < n; ++a) out[a] = RowSpread(spread, a, &values);
  }
  return out;
}

std::string RootTable(const Survey& survey, const ParityResult& result,
                      const std::vector<RegionSpread>& spreads) {
  const NodeResult& root = result.nodes.front();
  std::vector<int> order = RegionsWithParity(root);
  std::stable_sort(order.begin(), order.end(),
                   [&](int a, int b) { return root.parity(a) > root.parity(b); });
  size_t width = 6;
  for (int r : order) width = std::max(width, survey.regions.Code(r).size());
  width = std::min<size_t>(width, 24);
  const bool per_capita = root.real_per_capita_index.array().isFinite().any();
  auto pad = [](std::string text, size_t w, bool right) {
    if (text.size() >= w) return text;
    return right ? std::string(w - text.size(), ' ') + text : text + std::string(w - text.size(), ' ');
  };
  // Names are shown up to 24 characters, padded by code points.
  size_t name_width = 0;
  std::vector<std::string> names(survey.num_regions());
  for (int r : order) {
    if (r >= static_cast<int>(survey.region_name.size())) continue;
    names[r] = VisibleText(survey.region_name[r]);
    size_t chars = 0, cut = names[r].size();
    for (size_t i = 0; i < names[r].size(); ++i) {
      if ((static_cast<unsigned char>(names[r][i]) & 0xC0) == 0x80) continue;
      if (chars == 24) cut = std::min(cut, i);
      ++chars;
    }
    names[r].resize(cut);
    name_width = std::max(name_width, std::min<size_t>(chars, 24));
  }
  auto pad_name = [&](const std::string& text) {
    size_t chars = 0;
    for (unsigned char c : text) chars += (c & 0xC0) != 0x80;
    return text + std::string(name_width > chars ? name_width - chars : 0, ' ') + "  ";
  };
  if (name_width > 0) name_width = std::max<size_t>(name_width, 4);
  std::string out = pad("region", width, false) + "  " + (name_width > 0 ? pad_name("name") : "") +
                    pad("rank", 4, true) + "  " + pad("parity", 9, true);
  if (per_capita) out += "  " + pad("real/head", 9, true);
  out += "  " + pad("P-L spread, %", 13, true) + "  " + pad("worst pair", 10, false) + "\n";
  for (int r : order) {
    std::string code(survey.regions.Code(r).substr(0, width));
    out += pad(code, width, false) + "  " + (name_width > 0 ? pad_name(names[r]) : "") +
           pad(std::to_string(root.rank(r)), 4, true) + "  " +
           pad(FormatReadable(root.parity(r), 2), 9, true);
    if (per_capita) out += "  " + pad(FormatReadable(root.real_per_capita_index(r), 1), 9, true);
    std::string spread = "", partner = "";
    if (r < static_cast<int>(spreads.size()) && std::isfinite(spreads[r].max)) {
      spread = FormatReadable(100.0 * spreads[r].max, 2);  // the report's unit
      partner = std::string(survey.regions.Code(spreads[r].worst_partner));
    }
    out += "  " + pad(spread, 13, true) + "  " + partner + "\n";
  }
  return out;
}

}  // namespace paritas
