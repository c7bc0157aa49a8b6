// Contributions per node, from the same arrays the aggregation read
// (NodeInputArrays), so the heading parities and expenditure split here are
// the ones behind the node's parity. Against a mean every pair of regions
// counts, as in GEKS: with missing heading parities a pair's shares are
// renormalised to what the pair has, so pairs involving a region without a
// parity in some heading are visited one by one (regions² x headings at
// worst), while pairs of regions with every heading take four sums per
// heading (regions x headings when every region has every heading).
#include "paritas/use/heading_contributions.h"

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <iterator>
#include <limits>

#include "base/not_a_number.h"
#include "output/format_rows.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

// A node's inputs as the split needs them: ln heading parities, and each
// region's shares over the headings it can be compared on.
struct NodeInputs {
  Eigen::MatrixXd log_price;  // NaN where no usable parity
  Eigen::MatrixXd share;      // 0 where not usable; rows sum to 1 (or are all 0)
  std::vector<bool> usable;   // per region: a parity at the node and shares
};

// A heading is usable for a region with a positive parity and finite,
// non-negative spending (zero spending keeps it with share 0, as the
// bilateral matrices do); at a basic heading's own node spending is not
// needed. Shares are renormalised over the usable headings.
NodeInputs Inputs(const Survey& survey, const ParityResult& result, int node) {
  const NodeResult& n = result.nodes[node];
  const NodeArrays arrays = NodeInputArrays(survey, result, node);
  const int num_regions = static_cast<int>(arrays.price.rows());
  const int num_headings = static_cast<int>(arrays.price.cols());
  NodeInputs in;
  in.log_price = Eigen::MatrixXd::Constant(num_regions, num_headings, kNaN);
  in.share = Eigen::MatrixXd::Zero(num_regions, num_headings);
  in.usable.assign(num_regions, false);
  for (int r = 0; r < num_regions; ++r) {
    if (!(std::isfinite(n.parity(r)) && n.parity(r) > 0)) continue;
    double total = 0.0;
    for (int k = 0; k < num_headings; ++k) {
      const double p = arrays.price(r, k);
      const double e = n.is_heading ? 1.0 : arrays.expenditure(r, k);
      if (!(std::isfinite(p) && p > 0 && std::isfinite(e) && e >= 0)) continue;
      in.log_price(r, k) = std::log(p);
      in.share(r, k) = e;
      total += e;
    }
    if (!(total > 0)) continue;
    in.share.row(r) /= total;
    in.usable[r] = true;
  }
  return in;
}

// Spreads what the price parts leave of ln(parity / 100) over the headings
// in proportion to their weights (equal weights when these sum to zero).
void FinishRow(RegionContributions* row) {
  double price_total = 0.0, weight_total = 0.0;
  for (const HeadingContribution& c : row->headings) {
    price_total += c.price_part;
    weight_total += c.weight;
  }
  const double n = static_cast<double>(row->headings.size());
  const double rest = row->log_parity - price_total;
  for (HeadingContribution& c : row->headings) {
    c.weight = weight_total > 0 ? c.weight / weight_total : 1.0 / n;
    c.adjustment = c.weight * rest;
    c.log_contribution = c.price_part + c.adjustment;
  }
}

// Against region b: pair's Törnqvist terms, shares renormalised to the
// headings both have.
void AgainstRegion(const Survey& survey, const NodeInputs& in, const NodeResult& n, int node, int b,
                   std::vector<RegionContributions>* rows) {
  const std::vector<int>& headings = survey.classification.nodes()[node].headings;
  std::vector<int> matched;
  for (int r = 0; r < static_cast<int>(in.usable.size()); ++r) {
    if (!in.usable[r]) continue;
    double total_r = 0.0, total_b = 0.0;
    matched.clear();
    for (int k = 0; k < static_cast<int>(headings.size()); ++k) {
      if (std::isnan(in.log_price(r, k)) || std::isnan(in.log_price(b, k))) continue;
      matched.push_back(k);
      total_r += in.share(r, k);
      total_b += in.share(b, k);
    }
    if (matched.empty()) continue;
    RegionContributions row;
    row.node = node;
    row.region = r;
    row.log_parity = std::log(n.parity(r) / 100.0);
    const double m = static_cast<double>(matched.size());
    row.headings.reserve(matched.size());
    for (int k : matched) {
      HeadingContribution c;
      c.heading = headings[k];
      c.share = total_r > 0 ? in.share(r, k) / total_r : 1.0 / m;
      const double share_b = total_b > 0 ? in.share(b, k) / total_b : 1.0 / m;
      c.weight = 0.5 * (c.share + share_b);
      c.price_part = c.weight * (in.log_price(r, k) - in.log_price(b, k));
      row.headings.push_back(c);
    }
    FinishRow(&row);
    rows->push_back(std::move(row));
  }
}

// Sums over the regions with a parity in every heading of the node ("full"
// regions): a pair of full regions needs no renormalisation, so its terms
// summed over every full s take four sums per heading.
struct FullSums {
  std::vector<bool> full;
  double count = 0.0;
  double num_usable = 0.0;       // regions with a parity at the node
  std::vector<int> not_full;     // usable regions missing some heading
  std::vector<double> l, s, sl;  // per heading: sum of l_sk, s_sk, s_sk l_sk
};

FullSums SumsOverFullRegions(const NodeInputs& in) {
  const int num_headings = static_cast<int>(in.share.cols());
  FullSums sums;
  sums.full.assign(in.usable.size(), false);
  sums.l.assign(num_headings, 0.0);
  sums.s.assign(num_headings, 0.0);
  sums.sl.assign(num_headings, 0.0);
  for (int r = 0; r < static_cast<int>(in.usable.size()); ++r) {
    if (!in.usable[r]) continue;
    sums.num_usable += 1.0;
    if (in.log_price.row(r).array().isNaN().any()) {
      sums.not_full.push_back(r);
      continue;
    }
    sums.full[r] = true;
    sums.count += 1.0;
    for (int k = 0; k < num_headings; ++k) {
      sums.l[k] += in.log_price(r, k);
      sums.s[k] += in.share(r, k);
      sums.sl[k] += in.share(r, k) * in.log_price(r, k);
    }
  }
  return sums;
}

// Adds pair (r, s)'s Törnqvist terms, shares renormalised to the headings
// the pair has; a pair with nothing in common (or no spending on it) adds
// nothing.
void AddPair(const NodeInputs& in, int r, int s, std::vector<int>* matched,
             std::vector<double>* price) {
  const int num_headings = static_cast<int>(in.share.cols());
  matched->clear();
  double total_r = 0.0, total_s = 0.0;
  for (int k = 0; k < num_headings; ++k) {
    if (std::isnan(in.log_price(r, k)) || std::isnan(in.log_price(s, k))) continue;
    matched->push_back(k);
    total_r += in.share(r, k);
    total_s += in.share(s, k);
  }
  if (!(total_r > 0) || !(total_s > 0)) return;
  for (int k : *matched) {
    (*price)[k] += 0.5 * (in.share(r, k) / total_r + in.share(s, k) / total_s) *
                   (in.log_price(r, k) - in.log_price(s, k));
  }
}

// The price parts of region r against the average region: pair's Törnqvist
// terms against every region s with a parity at the node (r itself adds 0),
// shares renormalised to the headings each pair has, averaged over those
// regions. This is heading k's term in the GEKS-Törnqvist parity, ln P_r =
// mean_s ln T(s, r). Pairs of full regions come from the sums.
// `price` and `matched` are the caller's scratch (a thread's, reused row
// after row: the allocations, not the sums, dominated this split).
RegionContributions AgainstAverageRow(const Survey& survey, const NodeInputs& in,
                                      const NodeResult& n, int node, int r,
                                      const std::vector<double>& mean_share, const FullSums& sums,
                                      std::vector<double>* price_scratch, std::vector<int>* matched) {
  const std::vector<int>& headings = survey.classification.nodes()[node].headings;
  const int num_headings = static_cast<int>(headings.size());
  std::vector<double>& price = *price_scratch;
  price.assign(num_headings, 0.0);
  const double num_regions = sums.num_usable;
  if (sums.full[r]) {
    for (int s : sums.not_full) AddPair(in, r, s, matched, &price);
  } else {
    for (int s = 0; s < static_cast<int>(in.usable.size()); ++s) {
      if (in.usable[s] && s != r) AddPair(in, r, s, matched, &price);
    }
  }
  if (sums.full[r]) {
    // sum over full s of ½ (s_rk + s_sk)(l_rk - l_sk).
    for (int k = 0; k < num_headings; ++k) {
      const double l = in.log_price(r, k), sh = in.share(r, k);
      price[k] += 0.5 * (sums.count * sh * l - sh * sums.l[k] + l * sums.s[k] - sums.sl[k]);
    }
  }
  RegionContributions row;
  row.node = node;
  row.region = r;
  row.log_parity = std::log(n.parity(r) / 100.0);
  const auto l = in.log_price.row(r).array();
  row.headings.reserve(static_cast<size_t>((l == l).count()));  // the headings not NaN
  for (int k = 0; k < num_headings; ++k) {
    if (std::isnan(in.log_price(r, k))) continue;
    HeadingContribution c;
    c.heading = headings[k];
    c.share = in.share(r, k);
    c.weight = 0.5 * (c.share + mean_share[k]);
    c.price_part = price[k] / num_regions;
    row.headings.push_back(c);
  }
  if (!row.headings.empty()) FinishRow(&row);
  return row;
}

// Against the average region, every region; regions in parallel (each
// region's row is its own, so the result does not depend on the threads).
void AgainstAverage(const Survey& survey, const NodeInputs& in, const NodeResult& n, int node,
                    int num_threads, std::vector<RegionContributions>* rows) {
  const int num_headings = static_cast<int>(in.share.cols());
  const int num_regions = static_cast<int>(in.usable.size());
  std::vector<double> mean_share(num_headings, 0.0), count(num_headings, 0.0);
  for (int s = 0; s < num_regions; ++s) {
    if (!in.usable[s]) continue;
    for (int k = 0; k < num_headings; ++k) {
      if (std::isnan(in.log_price(s, k))) continue;
      mean_share[k] += in.share(s, k);
      count[k] += 1.0;
    }
  }
  for (int k = 0; k < num_headings; ++k) {
    if (count[k] > 0) mean_share[k] /= count[k];
  }
  const FullSums sums = SumsOverFullRegions(in);
  std::vector<RegionContributions> by_region(num_regions);
  // Threads only pay when pairs are visited one by one: a parallel region
  // per node costs a scheduling round trip, which a loaded machine makes
  // long.
  const double pair_work =
      static_cast<double>(sums.not_full.size()) * num_regions * std::max(num_headings, 1);
#pragma omp parallel if (pair_work > 4e6) num_threads(num_threads)
  {
    std::vector<double> price;
    std::vector<int> matched;
#pragma omp for schedule(dynamic, 4)
    for (int r = 0; r < num_regions; ++r) {
      if (in.usable[r]) {
        by_region[r] = AgainstAverageRow(survey, in, n, node, r, mean_share, sums, &price, &matched);
      }
    }
  }
  for (RegionContributions& row : by_region) {
    if (!row.headings.empty()) rows->push_back(std::move(row));
  }
}

}  // namespace

ContributionTable HeadingContributions(const Survey& survey, const ParityResult& result,
                                       const Reference& reference, int num_threads) {
  const int threads = num_threads > 0 ? num_threads : omp_get_max_threads();
  ContributionTable table;
  const int reference_region =
      reference.kind == ReferenceKind::kRegion ? survey.regions.Find(reference.region) : -1;
  table.against_region = reference_region >= 0;
  table.base = table.against_region ? "region '" + reference.region + "'" : "the average region";
  const int num_nodes = static_cast<int>(result.nodes.size());
  const std::vector<int>& heading_nodes = survey.classification.headings();
  // Each node's rows on their own, joined in node order below.
  std::vector<std::vector<RegionContributions>> rows_of(num_nodes);
  auto split = [&](int node) {
    const NodeResult& n = result.nodes[node];
    const NodeInputs in = Inputs(survey, result, node);
    std::vector<RegionContributions>& rows = rows_of[node];
    // A node normalised to the mean because the reference region has no
    // parity there is split against the average region too.
    if (reference_region >= 0 && in.usable[reference_region]) {
      AgainstRegion(survey, in, n, node, reference_region, &rows);
    } else {
      AgainstAverage(survey, in, n, node, threads, &rows);
    }
    for (RegionContributions& row : rows) {
      for (HeadingContribution& c : row.headings) {
        c.heading_parity = result.nodes[heading_nodes[c.heading]].parity(row.region);
      }
    }
  };
  // Node by node on this thread: a basic heading's split (one heading, no
  // pairs to visit) is little more than one allocation per region, and
  // under the process's single malloc arena (KeepFreedMemoryForReuse) two
  // threads making them contend for its lock: on T (3,000 regions, 100
  // headings) the stage took 0.18-0.20 s on two threads against 0.03 s on
  // one (bench/HISTORY.md, "Fifteenth round"). An aggregate with pairs to
  // visit spreads its own regions over the threads (AgainstAverage).
  for (int node = 0; node < num_nodes; ++node) split(node);
  size_t total = 0;
  for (const auto& rows : rows_of) total += rows.size();
  table.rows.reserve(total);
  for (auto& rows : rows_of) {
    std::move(rows.begin(), rows.end(), std::back_inserter(table.rows));
  }
  return table;
}

std::string ContributionsCsv(const Survey& survey, const ContributionTable& table) {
  internal::JoinedText text;
  ContributionsCsvBlocks(survey, table, text.Sink());
  return text.Take();
}

void ContributionsCsvBlocks(const Survey& survey, const ContributionTable& table,
                            const TextBlocks& emit) {
  const auto& nodes = survey.classification.nodes();
  // A row of the table is a region's rows, one per heading: the root's
  // rows hold every heading, a heading node's rows one. Each block reserves
  // for the mean row (the first row's count made a block of heading nodes
  // reserve 100 times what it wrote: gigabytes of address space on 3,000
  // regions, which strict overcommit would refuse).
  constexpr int64_t kRowsPerBlock = 256;
  size_t num_lines = 0;
  for (const RegionContributions& row : table.rows) num_lines += row.headings.size();
  const size_t bytes_per_row_hint =
      table.rows.empty() ? 0 : 120 * ((num_lines + table.rows.size() - 1) / table.rows.size());
  internal::FormatRowBlocks(
      static_cast<int64_t>(table.rows.size()), kRowsPerBlock, bytes_per_row_hint,
      [&](int64_t i, std::string* out) {
        const RegionContributions& row = table.rows[i];
        std::string prefix;
        AppendCsvField(nodes[row.node].code, &prefix);
        prefix += ',';
        AppendCsvField(survey.regions.Code(row.region), &prefix);
        prefix += ',';
        for (const HeadingContribution& c : row.headings) {
          *out += prefix;
          AppendCsvField(survey.heading_codes[c.heading], out);
          for (double v : {c.share, c.weight, c.heading_parity, c.price_part, c.adjustment,
                           c.log_contribution}) {
            *out += ',';
            AppendShortest(v, out);
          }
          *out += '\n';
        }
      },
      "node,region,heading,share,weight,heading_parity,price_part,adjustment,log_contribution\n",
      emit);
}

}  // namespace paritas
