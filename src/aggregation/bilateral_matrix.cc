// All-pairs bilateral indices from a few masked matrix products.
//
// Each pairwise sum over matched columns, sum_h m_ah m_bh x_ah y_bh, is
// ((M∘X)(M∘Y)ᵀ)_ab, so a region x region matrix of sums costs one GEMM. Log
// prices are centred per column first: the indices depend only on log price
// differences within a column, and centring keeps the differences of large
// products (Törnqvist, Jevons) from losing digits to the price level.
#include "paritas/aggregation/bilateral_matrix.h"

#include <omp.h>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "base/eigen_threads.h"
#include "base/median.h"
#include "base/not_a_number.h"
#include "paritas/aggregation/geks.h"

namespace paritas {
namespace {

// Subtracts from each column of `log_price` the mean over its masked
// entries; masked-out entries stay 0.
void CentreColumns(const Eigen::MatrixXd& mask, Eigen::MatrixXd* log_price) {
  for (Eigen::Index h = 0; h < log_price->cols(); ++h) {
    const double num_present = mask.col(h).sum();
    if (num_present == 0.0) continue;
    const double mean = log_price->col(h).sum() / num_present;
    log_price->col(h) -= mean * mask.col(h);
  }
}

// Sets entries of pairs without a matched column to NaN and the diagonal of
// regions with any column to exactly 1 (rounding would otherwise leave
// 1 ± 1e-16 where the identity test requires 1).
void FixEmptyPairsAndDiagonal(const Eigen::MatrixXd& count, Eigen::MatrixXd* index) {
  *index = (count.array() > 0.0).select(*index, kNaN);
  for (Eigen::Index a = 0; a < index->rows(); ++a) {
    if (count(a, a) > 0.0) (*index)(a, a) = 1.0;
  }
}

Eigen::MatrixXi ToCounts(const Eigen::MatrixXd& count) {
  // Sums of 0/1 products are exact in double; rounding only guards the cast.
  return count.array().round().cast<int>().matrix();
}

// The inputs of AllPairsWeighted as masked arrays, which hold exact zeros
// where an entry does not count, so NaN or infinite inputs never reach a
// product (NaN * 0 would be NaN). Only the arrays the requested matrices use
// are filled; the others stay empty.
struct MaskedArrays {
  Eigen::MatrixXd mask;
  Eigen::MatrixXd expenditure;
  Eigen::MatrixXd price;      // when Laspeyres, Paasche or Fisher are asked for
  Eigen::MatrixXd quantity;   // e / p, likewise
  Eigen::MatrixXd log_price;  // when Törnqvist is asked for
};

MaskedArrays MaskInputs(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                        bool need_value, bool need_log_price) {
  const Eigen::Index num_regions = price.rows();
  const Eigen::Index num_headings = price.cols();
  MaskedArrays m;
  m.mask = Eigen::MatrixXd::Zero(num_regions, num_headings);
  m.expenditure = m.mask;
  if (need_value) m.price = m.quantity = m.mask;
  if (need_log_price) m.log_price = m.mask;
  for (Eigen::Index h = 0; h < num_headings; ++h) {
    for (Eigen::Index r = 0; r < num_regions; ++r) {
      const double p = price(r, h);
      const double e = expenditure(r, h);
      // Zero expenditure keeps the heading (weight 0 on that side, as the
      // CPI Manual formulas give); no expenditure row (NaN) does not.
      if (!(std::isfinite(p) && std::isfinite(e) && p > 0.0 && e >= 0.0)) continue;
      m.mask(r, h) = 1.0;
      m.expenditure(r, h) = e;
      if (need_value) {
        m.price(r, h) = p;
        m.quantity(r, h) = e / p;
      }
      if (need_log_price) m.log_price(r, h) = std::log(p);
    }
  }
  return m;
}

// Calls visit(a, b) for every pair, in square tiles: each entry needs its
// transposed partner, and tiles keep both in cache.
template <typename Visit>
void ForEachPairInTiles(Eigen::Index num_regions, const Visit& visit) {
  constexpr Eigen::Index kTile = 64;
  for (Eigen::Index b0 = 0; b0 < num_regions; b0 += kTile) {
    const Eigen::Index b1 = std::min(num_regions, b0 + kTile);
    for (Eigen::Index a0 = 0; a0 < num_regions; a0 += kTile) {
      const Eigen::Index a1 = std::min(num_regions, a0 + kTile);
      for (Eigen::Index b = b0; b < b1; ++b) {
        for (Eigen::Index a = a0; a < a1; ++a) visit(a, b);
      }
    }
  }
}

// Fills Laspeyres and Paasche and/or Fisher from the masked arrays and
// value_a(a, b), the sum over the pair's matched headings of e_a = p_a q_a.
// Pairs where either region spends nothing on the matched headings are NaN; the diagonal of a region with any
// heading is exactly 1 (rounding would otherwise leave 1 ± 1e-16 where the
// identity test requires 1).
void FillValueIndices(const MaskedArrays& m, const Eigen::MatrixXd& value_a,
                      const BilateralOptions& options, BilateralMatrices* result) {
  const Eigen::Index num_regions = value_a.rows();
  // (a, b): sum over matched headings of p_b q_a.
  Eigen::MatrixXd value_b_basket_a(num_regions, num_regions);
  value_b_basket_a.noalias() = m.quantity * m.price.transpose();
  if (options.laspeyres_paasche) {
    result->laspeyres.resize(num_regions, num_regions);
    result->paasche.resize(num_regions, num_regions);
  }
  if (options.fisher) result->fisher.resize(num_regions, num_regions);
  ForEachPairInTiles(num_regions, [&](Eigen::Index a, Eigen::Index b) {
    double laspeyres = kNaN, paasche = kNaN, fisher = kNaN;
    if (a == b && value_a(a, a) > 0.0) {
      laspeyres = paasche = fisher = 1.0;
    } else if (value_a(a, b) > 0.0 && value_a(b, a) > 0.0) {
      laspeyres = value_b_basket_a(a, b) / value_a(a, b);
      // Paasche(a, b) = sum e_b / sum p_a q_b: the same two sums for (b, a).
      paasche = value_a(b, a) / value_b_basket_a(b, a);
      fisher = std::sqrt(laspeyres * paasche);
    }
    if (options.laspeyres_paasche) {
      result->laspeyres(a, b) = laspeyres;
      result->paasche(a, b) = paasche;
    }
    if (options.fisher) result->fisher(a, b) = fisher;
  });
}

// Returns Törnqvist from the masked arrays (whose log prices it centres and
// then weights in place) and value_a, with empty pairs and the diagonal set
// as in FillValueIndices.
Eigen::MatrixXd Tornqvist(const Eigen::MatrixXd& value_a, MaskedArrays* m) {
  const Eigen::Index num_regions = value_a.rows();
  CentreColumns(m->mask, &m->log_price);
  // With shares renormalised over the pair's matched set, the half of
  // ln T_ab weighted by region a's shares is
  //   X_ab = sum_h m_ah m_bh e_ah (y_bh - y_ah) / value_a(a, b),
  // and the half weighted by region b's shares is -X_ba, so
  // ln T = ½ (X - Xᵀ), antisymmetric by construction.
  Eigen::MatrixXd half_log(num_regions, num_regions);
  half_log.noalias() = m->expenditure * m->log_price.transpose();
  Eigen::MatrixXd weighted_log_a(num_regions, num_regions);
  m->log_price.array() *= m->expenditure.array();
  weighted_log_a.noalias() = m->log_price * m->mask.transpose();
  half_log = (half_log - weighted_log_a).cwiseQuotient(value_a);
  // The exponential stays one whole-matrix expression so that every entry
  // goes through the same exp as before the stages were fused.
  Eigen::MatrixXd tornqvist = (0.5 * (half_log - half_log.transpose())).array().exp().matrix();
  ForEachPairInTiles(num_regions, [&](Eigen::Index a, Eigen::Index b) {
    if (a == b && value_a(a, a) > 0.0) {
      tornqvist(a, b) = 1.0;
    } else if (!(value_a(a, b) > 0.0 && value_a(b, a) > 0.0)) {
      tornqvist(a, b) = kNaN;
    }
  });
  return tornqvist;
}

}  // namespace

BilateralOptions BilateralOptions::OnlyFisher() {
  BilateralOptions options;
  options.laspeyres_paasche = false;
  options.tornqvist = false;
  options.num_matched = false;
  return options;
}

BilateralOptions BilateralOptions::OnlyTornqvist() {
  BilateralOptions options;
  options.laspeyres_paasche = false;
  options.fisher = false;
  options.num_matched = false;
  return options;
}

BilateralOptions BilateralOptions::None() {
  BilateralOptions options = OnlyFisher();
  options.fisher = false;
  return options;
}

bool BilateralOptions::IsValid(std::string* error) const {
  if (error != nullptr) error->clear();
  return true;
}

BilateralMatrices AllPairsWeighted(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                                   const BilateralOptions& options) {
  assert(price.rows() == expenditure.rows() && price.cols() == expenditure.cols());
  const Eigen::Index num_regions = price.rows();
  const bool need_value = options.laspeyres_paasche || options.fisher;
  BilateralMatrices result;
  if (!need_value && !options.tornqvist && !options.num_matched) return result;
  MaskedArrays m = MaskInputs(price, expenditure, need_value, options.tornqvist);

  // (a, b): sum over matched headings of e_a = p_a q_a. A pair has indices
  // exactly where both value_a(a, b) and value_a(b, a) are > 0 (each region
  // spends on some matched heading), so these stand in for the count when
  // marking empty pairs.
  Eigen::MatrixXd value_a(num_regions, num_regions);
  value_a.noalias() = m.expenditure * m.mask.transpose();
  if (options.num_matched) {
    Eigen::MatrixXd count(num_regions, num_regions);
    count.noalias() = m.mask * m.mask.transpose();
    result.num_matched = ToCounts(count);
  }
  if (need_value) FillValueIndices(m, value_a, options, &result);
  if (options.tornqvist) result.tornqvist = Tornqvist(value_a, &m);
  return result;
}

Eigen::MatrixXd AllPairsJevons(const Eigen::MatrixXd& log_price, const Eigen::MatrixXd& present,
                               Eigen::MatrixXi* num_matched) {
  assert(log_price.rows() == present.rows() && log_price.cols() == present.cols());
  // Zero the log price wherever the item is absent: callers may leave any
  // value there, and the products below assume y = 0 outside the mask.
  const Eigen::MatrixXd mask =
      (present.array() != 0.0 && log_price.array().isFinite()).cast<double>().matrix();
  Eigen::MatrixXd masked_log_price = (mask.array() > 0.0).select(log_price, 0.0);
  CentreColumns(mask, &masked_log_price);

  const Eigen::MatrixXd count = mask * mask.transpose();
  // sum_i m_ai m_bi y_bi at (a, b); its transpose holds sum_i m_ai m_bi y_ai.
  const Eigen::MatrixXd sum_log_b = mask * masked_log_price.transpose();
  Eigen::MatrixXd jevons =
      (sum_log_b - sum_log_b.transpose()).cwiseQuotient(count).array().exp().matrix();
  FixEmptyPairsAndDiagonal(count, &jevons);
  if (num_matched != nullptr) *num_matched = ToCounts(count);
  return jevons;
}

Eigen::MatrixXd AllPairsJevonsWeighted(const Eigen::MatrixXd& log_price,
                                       const Eigen::MatrixXd& present,
                                       const Eigen::VectorXd& item_weight) {
  assert(log_price.rows() == present.rows() && log_price.cols() == present.cols());
  assert(item_weight.size() == log_price.cols());
  const Eigen::MatrixXd mask =
      (present.array() != 0.0 && log_price.array().isFinite()).cast<double>().matrix() *
      (item_weight.array() > 0.0).cast<double>().matrix().asDiagonal();
  Eigen::MatrixXd masked_log_price = (mask.array() > 0.0).select(log_price, 0.0);
  CentreColumns(mask, &masked_log_price);
  // The weight goes on one factor of each product only: sum_i w_i m_ai m_bi.
  const Eigen::MatrixXd weighted_mask = mask * item_weight.asDiagonal();
  const Eigen::MatrixXd weight_sum = weighted_mask * mask.transpose();
  const Eigen::MatrixXd sum_log_b = weighted_mask * masked_log_price.transpose();
  Eigen::MatrixXd jevons =
      (sum_log_b - sum_log_b.transpose()).cwiseQuotient(weight_sum).array().exp().matrix();
  FixEmptyPairsAndDiagonal(weight_sum, &jevons);
  return jevons;
}

Eigen::MatrixXd AllPairsJevonsRepresentative(const Eigen::MatrixXd& log_price,
                                             const Eigen::MatrixXd& present,
                                             const Eigen::MatrixXd& representative,
                                             const Eigen::VectorXd& item_weight,
                                             Eigen::MatrixXi* num_matched) {
  assert(log_price.rows() == present.rows() && log_price.cols() == present.cols());
  assert(representative.rows() == present.rows() && representative.cols() == present.cols());
  const Eigen::Index num_items = log_price.cols();
  const Eigen::VectorXd weight =
      item_weight.size() == 0 ? Eigen::VectorXd::Ones(num_items) : item_weight;
  assert(weight.size() == num_items);
  const Eigen::MatrixXd mask =
      (present.array() != 0.0 && log_price.array().isFinite()).cast<double>().matrix() *
      (weight.array() > 0.0).cast<double>().matrix().asDiagonal();
  const Eigen::MatrixXd rep =
      mask.cwiseProduct((representative.array() != 0.0).cast<double>().matrix());
  Eigen::MatrixXd y = (mask.array() > 0.0).select(log_price, 0.0);
  CentreColumns(mask, &y);
  const Eigen::MatrixXd weighted_rep = rep * weight.asDiagonal();
  // (a, b): sum_i w_i r_ai m_bi, and the sums of ln p_bi and ln p_ai over them.
  const Eigen::MatrixXd count = weighted_rep * mask.transpose();
  const Eigen::MatrixXd sum_b = weighted_rep * y.transpose();
  const Eigen::MatrixXd sum_a = (weighted_rep.cwiseProduct(y)) * mask.transpose();
  const Eigen::MatrixXd log_a = (sum_b - sum_a).cwiseQuotient(count);  // ln J^(a)
  const Eigen::Index n = log_price.rows();
  Eigen::MatrixXd jevons(n, n);
  for (Eigen::Index b = 0; b < n; ++b) {
    for (Eigen::Index a = 0; a < n; ++a) {
      const bool has_a = count(a, b) > 0.0, has_b = count(b, a) > 0.0;
      // ln J^(b)_ab is -ln J^(a)_ba: b's representative items, seen from b.
      double value = kNaN;
      if (has_a && has_b) {
        value = std::exp(0.5 * (log_a(a, b) - log_a(b, a)));
      } else if (has_a) {
        value = std::exp(log_a(a, b));
      } else if (has_b) {
        value = std::exp(-log_a(b, a));
      }
      jevons(a, b) = value;
    }
  }
  for (Eigen::Index a = 0; a < n; ++a) {
    jevons(a, a) = mask.row(a).sum() > 0.0 ? 1.0 : kNaN;
  }
  if (num_matched != nullptr) {
    *num_matched = (rep * mask.transpose()).array().round().cast<int>().matrix();
  }
  return jevons;
}

}  // namespace paritas

namespace paritas {
namespace {

// Orders pairs widest first, ties by (a, b): a total order, so the widest
// pairs do not depend on how the rows were split.
bool WiderPair(const SpreadPairIndices& x, const SpreadPairIndices& y) {
  return x.spread > y.spread || (x.spread == y.spread && (x.a < y.a || (x.a == y.a && x.b < y.b)));
}

// One row block's share of AllPairsSpreads.
struct SpreadBlock {
  std::vector<double> pair_spreads;
  std::vector<SpreadPairIndices> widest;
};

// Median and largest of `values` as RegionSpreads computes them (reorders
// `values`); `partner` the first index reaching the largest.
RegionSpread SummariseRow(std::vector<double>* values, double largest, int partner) {
  RegionSpread out;
  if (values->empty()) {
    out.median = out.max = kNaN;
    return out;
  }
  out.max = largest;
  out.worst_partner = partner;
  out.median = MedianInPlace(values);
  return out;
}

// Rows [a0, a1) of the spreads: the sums of FillValueIndices for the block
// (value_a and value_b_basket_a at (a, b) and at (b, a)), then each row
// reduced as RegionSpreads, the large-spread check and the report do.
void SpreadRows(const MaskedArrays& m, Eigen::Index a0, Eigen::Index a1, const SpreadOptions& options,
                SpreadSummary* out, SpreadBlock* block) {
  const Eigen::Index n = m.mask.rows(), rows = a1 - a0;
  // The transposed sums come from the same products as in the full matrix
  // (all regions as rows, the block as columns): the kernels' summation order
  // depends on an entry's place in the product, and with blocks starting at
  // multiples of 4 every entry keeps its place's order (tested).
  Eigen::MatrixXd value_ab(rows, n), value_ba(n, rows), basket_ab(rows, n), basket_ba(n, rows);
  value_ab.noalias() = m.expenditure.middleRows(a0, rows) * m.mask.transpose();
  value_ba.noalias() = m.expenditure * m.mask.middleRows(a0, rows).transpose();
  basket_ab.noalias() = m.quantity.middleRows(a0, rows) * m.price.transpose();
  basket_ba.noalias() = m.quantity * m.price.middleRows(a0, rows).transpose();
  // The ratio L / P of a row, padded to an even length so that Eigen's
  // vectorised logarithm takes every entry, as it does over a whole matrix.
  Eigen::ArrayXd ratio(n + n % 2), laspeyres(n), paasche(n);
  std::vector<double> values;
  for (Eigen::Index i = 0; i < rows; ++i) {
    const Eigen::Index a = a0 + i;
    ratio.setOnes();
    for (Eigen::Index b = 0; b < n; ++b) {
      double l = kNaN, p = kNaN;
      if (a == b && value_ab(i, a) > 0.0) {
        l = p = 1.0;
      } else if (value_ab(i, b) > 0.0 && value_ba(b, i) > 0.0) {
        l = basket_ab(i, b) / value_ab(i, b);
        p = value_ba(b, i) / basket_ba(b, i);
      }
      laspeyres(b) = l, paasche(b) = p, ratio(b) = l / p;
    }
    const Eigen::ArrayXd spread = ratio.log().abs();
    values.clear();
    double largest = 0.0, worst = 0.0;
    int partner = -1, check_partner = -1;
    for (Eigen::Index b = 0; b < n; ++b) {
      if (b != a && std::isfinite(spread(b))) {
        values.push_back(spread(b));
        if (spread(b) > largest || partner < 0) largest = spread(b), partner = static_cast<int>(b);
      }
      const double s = std::abs(std::log(laspeyres(b) / paasche(b)));
      if (b != a && std::isfinite(100.0 * s) && 100.0 * s > worst) {
        worst = 100.0 * s, check_partner = static_cast<int>(b);
      }
      if (b <= a || !std::isfinite(s)) continue;
      if (options.keep_pair_spreads) block->pair_spreads.push_back(s);
      if (options.num_widest == 0) continue;
      SpreadPairIndices pair;
      pair.a = static_cast<int>(a), pair.b = static_cast<int>(b), pair.spread = s;
      pair.laspeyres = laspeyres(b), pair.paasche = paasche(b);
      pair.fisher = std::sqrt(pair.laspeyres * pair.paasche);
      const size_t k = static_cast<size_t>(options.num_widest);
      if (block->widest.size() == k && !WiderPair(pair, block->widest.front())) continue;
      block->widest.push_back(pair);
      std::push_heap(block->widest.begin(), block->widest.end(), WiderPair);
      if (block->widest.size() > k) {
        std::pop_heap(block->widest.begin(), block->widest.end(), WiderPair);
        block->widest.pop_back();
      }
    }
    out->regions[a] = SummariseRow(&values, largest, partner);
    out->check_percent[a] = worst;
    out->check_partner[a] = check_partner;
  }
}

// Törnqvist and the matched count of one pair, by the sums of Tornqvist
// over the centred log prices `log_price` (CentreColumns of the masked
// log prices).
void CompletePair(const MaskedArrays& m, const Eigen::MatrixXd& log_price, SpreadPairIndices* pair) {
  const int a = pair->a, b = pair->b;
  double half_ab = 0.0, weighted_ab = 0.0, half_ba = 0.0, weighted_ba = 0.0;
  double value_ab = 0.0, value_ba = 0.0, count = 0.0;
  for (Eigen::Index h = 0; h < m.mask.cols(); ++h) {
    count += m.mask(a, h) * m.mask(b, h);
    value_ab += m.expenditure(a, h) * m.mask(b, h);
    value_ba += m.expenditure(b, h) * m.mask(a, h);
    half_ab += m.expenditure(a, h) * log_price(b, h);
    weighted_ab += log_price(a, h) * m.expenditure(a, h) * m.mask(b, h);
    half_ba += m.expenditure(b, h) * log_price(a, h);
    weighted_ba += log_price(b, h) * m.expenditure(b, h) * m.mask(a, h);
  }
  const double log_ab = (half_ab - weighted_ab) / value_ab;
  const double log_ba = (half_ba - weighted_ba) / value_ba;
  pair->tornqvist = std::exp(0.5 * (log_ab - log_ba));
  pair->num_matched = static_cast<int>(std::lround(count));
}

}  // namespace

namespace {

// The message for the block size and thread count shared by the row-block
// options (the last problem found wins), or `message` when both are valid.
std::string RowBlockOptionsMessage(int block_rows, int num_threads, std::string message) {
  if (block_rows < 4 || block_rows % 4 != 0) {
    message = "block_rows must be a multiple of 4, found " + std::to_string(block_rows);
  }
  if (num_threads < 0) message = "num_threads must be >= 0, found " + std::to_string(num_threads);
  return message;
}

}  // namespace

bool SpreadOptions::IsValid(std::string* error) const {
  std::string message;
  if (num_widest < 0) message = "num_widest must be >= 0, found " + std::to_string(num_widest);
  message = RowBlockOptionsMessage(block_rows, num_threads, message);
  if (error != nullptr) *error = message;
  return message.empty();
}

SpreadSummary AllPairsSpreads(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                              const SpreadOptions& options) {
  assert(price.rows() == expenditure.rows() && price.cols() == expenditure.cols());
  assert(options.IsValid(nullptr));
  const Eigen::Index n = price.rows();
  MaskedArrays m = MaskInputs(price, expenditure, true, options.num_widest > 0);
  SpreadSummary out;
  out.regions.resize(n);
  out.check_percent.assign(n, 0.0);
  out.check_partner.assign(n, -1);
  const Eigen::Index step = options.block_rows;
  const int num_blocks = static_cast<int>((n + step - 1) / step);
  std::vector<SpreadBlock> blocks(num_blocks);
  // Each block writes its own rows and its own lists; the lists are joined
  // in block order below, so the thread count changes nothing.
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads) if (num_blocks > 1)
  for (int k = 0; k < num_blocks; ++k) {
    internal::KeepEigenOnThisThread();  // each block's products on its own thread
    SpreadRows(m, k * step, std::min(n, (k + 1) * step), options, &out, &blocks[k]);
  }
  for (SpreadBlock& block : blocks) {
    out.pair_spreads.insert(out.pair_spreads.end(), block.pair_spreads.begin(),
                            block.pair_spreads.end());
    out.widest.insert(out.widest.end(), block.widest.begin(), block.widest.end());
    block = SpreadBlock();
  }
  const size_t k = std::min(out.widest.size(), static_cast<size_t>(options.num_widest));
  std::partial_sort(out.widest.begin(), out.widest.begin() + k, out.widest.end(), WiderPair);
  out.widest.resize(k);
  if (k > 0) CentreColumns(m.mask, &m.log_price);
  for (SpreadPairIndices& pair : out.widest) CompletePair(m, m.log_price, &pair);
  return out;
}

}  // namespace paritas

namespace paritas {
namespace {

// d_ab of Geks for the pair's log Fisher indices `ab` = ln F(a, b) and `ba`
// = ln F(b, a): both finite, the mean of the two directions; one, that one,
// signed; none, 0 (and *linked false).
double AntisymmetricLog(double ab, double ba, bool* linked) {
  const bool has_ab = std::isfinite(ab), has_ba = std::isfinite(ba);
  *linked = has_ab || has_ba;
  if (!*linked) return 0.0;
  return has_ab && has_ba ? 0.5 * (ab - ba) : (has_ab ? ab : -ba);
}

// The upper triangle of Geks's d (d_bc for b < c) of n regions, row by
// row: row b holds c = b + 1 .. n - 1 and starts at b (2n - b - 1) / 2.
inline size_t PackedRow(Eigen::Index n, Eigen::Index b) {
  return static_cast<size_t>(b) * (2 * n - b - 1) / 2;
}

// Copies the transpose of `in` into `out` (already of the transposed
// shape) by square tiles, so that both sides stay in cache.
void TransposeInTiles(const Eigen::MatrixXd& in, Eigen::MatrixXd* out) {
  constexpr Eigen::Index kSide = 32;
  for (Eigen::Index c0 = 0; c0 < in.cols(); c0 += kSide) {
    const Eigen::Index c1 = std::min(in.cols(), c0 + kSide);
    for (Eigen::Index r0 = 0; r0 < in.rows(); r0 += kSide) {
      const Eigen::Index r1 = std::min(in.rows(), r0 + kSide);
      for (Eigen::Index r = r0; r < r1; ++r) {
        for (Eigen::Index c = c0; c < c1; ++c) (*out)(c, r) = in(r, c);
      }
    }
  }
}

// The sums of a row block b in [b0, b0 + rows) against the partners c from
// b0 on, each as partners x block rows: (c, i) holds the sum at (b0 + i, c)
// in the *_bc matrices and at (c, b0 + i) in the *_cb ones. `value` is the
// expenditure sum (value_a of AllPairsWeighted); `x` and `y` are the
// index's own: for Fisher the basket sum sum p_c q_b (y unused), for
// Törnqvist sum e_b y_c and sum e_b y_b m_c over the centred log prices y.
struct BlockSums {
  Eigen::MatrixXd value_bc, value_cb, x_bc, x_cb, y_bc, y_cb;
};

// One pair of products of masked arrays: `bc` the transposed block rows of
// left * rightᵀ, `cb` its block columns (blocks laid out as AllPairsSpreads's,
// so every entry is summed as in the full product).
void BlockProduct(const Eigen::MatrixXd& left, const Eigen::MatrixXd& right, Eigen::Index b0,
                  Eigen::Index rows, Eigen::MatrixXd* scratch, Eigen::MatrixXd* bc,
                  Eigen::MatrixXd* cb) {
  const Eigen::Index cols = left.rows() - b0;
  scratch->resize(rows, cols);
  scratch->noalias() = left.middleRows(b0, rows) * right.middleRows(b0, cols).transpose();
  bc->resize(cols, rows);
  TransposeInTiles(*scratch, bc);
  cb->resize(cols, rows);
  cb->noalias() = left.middleRows(b0, cols) * right.middleRows(b0, rows).transpose();
}

// The arrays a GEKS index is formed from, and which index.
struct GeksInputs {
  GeksIndex index = GeksIndex::kFisher;
  Eigen::MatrixXd mask, expenditure;
  // Fisher: quantity and price. Törnqvist: the centred log prices y and
  // e ∘ y.
  Eigen::MatrixXd first, second;
};

// The masked arrays `index` needs, as AllPairsWeighted prepares them.
GeksInputs MakeGeksInputs(GeksIndex index, const Eigen::MatrixXd& price,
                          const Eigen::MatrixXd& expenditure) {
  const bool fisher = index == GeksIndex::kFisher;
  MaskedArrays m = MaskInputs(price, expenditure, fisher, !fisher);
  GeksInputs in;
  in.index = index;
  if (fisher) {
    in.first = std::move(m.quantity);
    in.second = std::move(m.price);
  } else {
    // As Tornqvist: centred log prices, then weighted by expenditure.
    CentreColumns(m.mask, &m.log_price);
    in.second = m.log_price.cwiseProduct(m.expenditure);
    in.first = std::move(m.log_price);
  }
  in.mask = std::move(m.mask);
  in.expenditure = std::move(m.expenditure);
  return in;
}

// Fills entries [0, len) of index_bc and index_cb with the index at (b, c)
// and at (c, b) for the partners c = b + 1 + t from column i of `sums`, as
// AllPairsWeighted forms them entry by entry (vectorised quotients and roots
// are IEEE and give the same bits as one at a time), NaN where either side
// spends nothing on the matched headings.
void PairIndices(GeksIndex index, const BlockSums& sums, Eigen::Index i, Eigen::Index len,
                 Eigen::ArrayXd* index_bc, Eigen::ArrayXd* index_cb) {
  const auto vb = sums.value_bc.col(i).segment(i + 1, len).array();
  const auto vc = sums.value_cb.col(i).segment(i + 1, len).array();
  const auto xb = sums.x_bc.col(i).segment(i + 1, len).array();
  const auto xc = sums.x_cb.col(i).segment(i + 1, len).array();
  if (index == GeksIndex::kFisher) {
    // Laspeyres times Paasche, each quotient first.
    index_bc->head(len) = ((xb / vb) * (vc / xc)).sqrt();
    index_cb->head(len) = ((xc / vc) * (vb / xb)).sqrt();
  } else {
    // exp(½ (X_bc - X_cb)) as Tornqvist forms it, with std::exp: its
    // whole-matrix expression mixes storage orders, so Eigen takes it
    // entry by entry.
    const auto yb = sums.y_bc.col(i).segment(i + 1, len).array();
    const auto yc = sums.y_cb.col(i).segment(i + 1, len).array();
    for (Eigen::Index t = 0; t < len; ++t) {
      const double half_bc = (xb(t) - yb(t)) / vb(t), half_cb = (xc(t) - yc(t)) / vc(t);
      (*index_bc)(t) = std::exp(0.5 * (half_bc - half_cb));
      (*index_cb)(t) = std::exp(0.5 * (half_cb - half_bc));
    }
  }
  for (Eigen::Index t = 0; t < len; ++t) {
    if (!(vb(t) > 0.0 && vc(t) > 0.0)) (*index_bc)(t) = (*index_cb)(t) = kNaN;
  }
}

// Rows [b0, b1) of the upper triangle: for each region b taking part
// (`member`) and each c > b, the index at (b, c) and at (c, b), their
// logarithms as Geks takes them (Eigen's vectorised log, as over the whole
// matrix; segments padded to a multiple of 4 so that every entry gets it),
// and d_bc into `packed`. Returns false when two members have no index.
bool GeksRows(const GeksInputs& in, const std::vector<char>& member, Eigen::Index b0,
              Eigen::Index b1, double* packed) {
  const Eigen::Index n = in.mask.rows(), rows = b1 - b0, cols = n - b0;
  BlockSums sums;
  Eigen::MatrixXd scratch;
  BlockProduct(in.expenditure, in.mask, b0, rows, &scratch, &sums.value_bc, &sums.value_cb);
  if (in.index == GeksIndex::kFisher) {
    BlockProduct(in.first, in.second, b0, rows, &scratch, &sums.x_bc, &sums.x_cb);
  } else {
    BlockProduct(in.expenditure, in.first, b0, rows, &scratch, &sums.x_bc, &sums.x_cb);
    BlockProduct(in.second, in.mask, b0, rows, &scratch, &sums.y_bc, &sums.y_cb);
  }
  const Eigen::Index padded = (cols + 3) / 4 * 4;
  Eigen::ArrayXd index_bc(padded), index_cb(padded), log_bc(padded), log_cb(padded);
  for (Eigen::Index i = 0; i < rows; ++i) {
    const Eigen::Index b = b0 + i, len = cols - i - 1;
    if (!member[b] || len == 0) continue;
    index_bc.setOnes();
    index_cb.setOnes();
    PairIndices(in.index, sums, i, len, &index_bc, &index_cb);
    log_bc = index_bc.log();
    log_cb = index_cb.log();
    double* row = packed + PackedRow(n, b);
    for (Eigen::Index t = 0; t < len; ++t) {
      bool linked;
      row[t] = AntisymmetricLog(log_bc(t), log_cb(t), &linked);
      if (!linked && member[b + 1 + t]) return false;
    }
  }
  return true;
}

// Sum over the members c, ascending, of d_cb (d_cb = -d_bc below the
// diagonal, 0 on it) for the members b of `tile`, as Eigen sums a column of
// d(g, g) in Geks: from the first term on, one after the other.
void GeksColumnSums(Eigen::Index n, const std::vector<int>& members, const double* packed,
                    const int* tile, int tile_size, double* sums) {
  for (size_t k = 0; k < members.size(); ++k) {
    const Eigen::Index c = members[k];
    for (int s = 0; s < tile_size; ++s) {
      const Eigen::Index b = tile[s];
      double d = 0.0;
      if (c < b) d = packed[PackedRow(n, c) + (b - c - 1)];
      if (c > b) d = -packed[PackedRow(n, b) + (c - b - 1)];
      sums[s] = k == 0 ? d : sums[s] + d;
    }
  }
}

}  // namespace

bool GeksBlockOptions::IsValid(std::string* error) const {
  const std::string message = RowBlockOptionsMessage(block_rows, num_threads, "");
  if (error != nullptr) *error = message;
  return message.empty();
}

bool GeksByRowBlocks(GeksIndex index, const Eigen::MatrixXd& price,
                     const Eigen::MatrixXd& expenditure, const GeksBlockOptions& options,
                     GeksResult* result) {
  assert(price.rows() == expenditure.rows() && price.cols() == expenditure.cols());
  assert(options.IsValid(nullptr));
  const Eigen::Index n = price.rows();
  const GeksInputs in = MakeGeksInputs(index, price, expenditure);
  // A region takes part (its diagonal index is 1, finite) exactly when it
  // spends on one of its valid headings; any pair needs that of both.
  std::vector<char> member(n, 0);
  std::vector<int> members;
  for (Eigen::Index b = 0; b < n; ++b) {
    member[b] = (in.expenditure.row(b).array() > 0.0).any() ? 1 : 0;
    if (member[b]) members.push_back(static_cast<int>(b));
  }
  const int size = static_cast<int>(members.size());
  if (size < 2) return false;
  // Not zeroed: every entry read below (a pair of members) is written first.
  const std::unique_ptr<double[]> packed_storage(new double[PackedRow(n, n)]);
  double* const packed = packed_storage.get();
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();
  const Eigen::Index step = options.block_rows;
  const int num_blocks = static_cast<int>((n + step - 1) / step);
  std::vector<char> block_linked(num_blocks, 1);
  // Each block writes its own entries of the triangle; the sums below run
  // in a fixed order, so the thread count changes nothing.
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads) if (num_blocks > 1)
  for (int k = 0; k < num_blocks; ++k) {
    internal::KeepEigenOnThisThread();
    block_linked[k] = GeksRows(in, member, k * step, std::min(n, (k + 1) * step), packed);
  }
  if (std::find(block_linked.begin(), block_linked.end(), 0) != block_linked.end()) return false;
  constexpr int kTile = 64;
  const int num_tiles = (size + kTile - 1) / kTile;
  std::vector<double> column_sum(size);
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads) if (num_tiles > 1)
  for (int k = 0; k < num_tiles; ++k) {
    const int first = k * kTile;
    GeksColumnSums(n, members, packed, members.data() + first, std::min(kTile, size - first),
                   column_sum.data() + first);
  }

  // Geks's closed form and residual, on the same numbers in the same order.
  GeksResult out;
  out.log_parity = Eigen::VectorXd::Constant(n, kNaN);
  out.identified = true;
  out.complete = true;
  Eigen::VectorXd x = Eigen::Map<const Eigen::VectorXd>(column_sum.data(), size) / size;
  x.array() -= x.mean();
  for (int j = 0; j < size; ++j) out.log_parity[members[j]] = x[j];
  double sum_sq = 0.0;
  for (int j = 1; j < size; ++j) {
    const Eigen::Index b = members[j];
    for (int i = 0; i < j; ++i) {
      const Eigen::Index a = members[i];
      const double e = packed[PackedRow(n, a) + (b - a - 1)] - (x[j] - x[i]);
      sum_sq += e * e;
    }
  }
  const long long num_pairs = static_cast<long long>(size) * (size - 1) / 2;
  out.rms_log_residual = std::sqrt(sum_sq / static_cast<double>(num_pairs));
  out.groups.push_back(std::move(members));
  *result = std::move(out);
  return true;
}

}  // namespace paritas
