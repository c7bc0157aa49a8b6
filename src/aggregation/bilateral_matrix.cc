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

#include "base/dense_products.h"
#include "base/eigen_threads.h"
#include "base/huge_pages.h"
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
  internal::SetProductTransposed(m.quantity, m.price, value_b_basket_a);
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
  internal::SetProductTransposed(m->expenditure, m->log_price, half_log);
  Eigen::MatrixXd weighted_log_a(num_regions, num_regions);
  m->log_price.array() *= m->expenditure.array();
  internal::SetProductTransposed(m->log_price, m->mask, weighted_log_a);
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
  internal::SetProductTransposed(m.expenditure, m.mask, value_a);
  if (options.num_matched) {
    Eigen::MatrixXd count(num_regions, num_regions);
    internal::SetProductTransposed(m.mask, m.mask, count);
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

// Median (unless `median` is false: NaN) and largest of `values` as
// RegionSpreads computes them (reorders `values`); `partner` the first index
// reaching the largest.
RegionSpread SummariseRow(std::vector<double>* values, double largest, int partner,
                          bool median = true) {
  RegionSpread out;
  if (values->empty()) {
    out.median = out.max = kNaN;
    return out;
  }
  out.max = largest;
  out.worst_partner = partner;
  out.median = median ? MedianInPlace(values) : kNaN;
  return out;
}

// The same without the median, from the largest and its partner alone
// (partner -1: no finite spread).
RegionSpread LargestOfRow(double largest, int partner) {
  RegionSpread out;
  out.median = kNaN;
  if (partner < 0) {
    out.max = kNaN;
    return out;
  }
  out.max = largest;
  out.worst_partner = partner;
  return out;
}

// Offers a spread of a row's partner to the row's largest as RegionSpreads
// takes it: finite, and strictly above the largest so far or the first.
inline void OfferLargest(double spread, int with, double* largest, int* partner) {
  if (!std::isfinite(spread)) return;
  if (spread > *largest || *partner < 0) *largest = spread, *partner = with;
}

// Rows [a0, a1) of the spreads: the sums of FillValueIndices for the block
// (value_a and value_b_basket_a at (a, b) and at (b, a)), then each row
// reduced as RegionSpreads, the large-spread check and the report do.
void SpreadRows(const MaskedArrays& m, Eigen::Index a0, Eigen::Index a1, const SpreadOptions& options,
                SpreadSummary* out, SpreadBlock* block) {
  const Eigen::Index n = m.mask.rows(), rows = a1 - a0;
  // Every entry of the dense kernels' products is one in-order chain over
  // the headings, so the block's sums have the full matrix's bits.
  Eigen::MatrixXd value_ab(rows, n), value_ba(n, rows), basket_ab(rows, n), basket_ba(n, rows);
  internal::SetProductTransposed(m.expenditure.middleRows(a0, rows), m.mask, value_ab);
  internal::SetProductTransposed(m.expenditure, m.mask.middleRows(a0, rows), value_ba);
  internal::SetProductTransposed(m.quantity.middleRows(a0, rows), m.price, basket_ab);
  internal::SetProductTransposed(m.quantity, m.price.middleRows(a0, rows), basket_ba);
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
        OfferLargest(spread(b), static_cast<int>(b), &largest, &partner);
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
      const size_t k = static_cast<size_t>(options.num_widest);
      if (block->widest.size() == k && !WiderPair(pair, block->widest.front())) continue;
      pair.laspeyres = laspeyres(b), pair.paasche = paasche(b);
      pair.fisher = std::sqrt(pair.laspeyres * pair.paasche);
      block->widest.push_back(pair);
      std::push_heap(block->widest.begin(), block->widest.end(), WiderPair);
      if (block->widest.size() > k) {
        std::pop_heap(block->widest.begin(), block->widest.end(), WiderPair);
        block->widest.pop_back();
      }
    }
    out->regions[a] = SummariseRow(&values, largest, partner, options.region_medians);
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

// Keeps the options.num_widest widest of out->widest, widest first, and
// completes them (Törnqvist, matched count) from `m` (masked with log
// prices, which this centres).
void FinishWidest(MaskedArrays* m, const SpreadOptions& options, SpreadSummary* out) {
  const size_t k = std::min(out->widest.size(), static_cast<size_t>(options.num_widest));
  std::partial_sort(out->widest.begin(), out->widest.begin() + k, out->widest.end(), WiderPair);
  out->widest.resize(k);
  if (k > 0) CentreColumns(m->mask, &m->log_price);
  for (SpreadPairIndices& pair : out->widest) CompletePair(*m, m->log_price, &pair);
}

// The same from the node's arrays.
void FinishWidest(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                  const SpreadOptions& options, SpreadSummary* out) {
  if (out->widest.empty()) return;
  MaskedArrays m = MaskInputs(price, expenditure, false, options.num_widest > 0);
  FinishWidest(&m, options, out);
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
  FinishWidest(&m, options, &out);
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

using MatrixMap = Eigen::Map<Eigen::MatrixXd>;

// The sums of a row block b in [b0, b0 + rows) against the partners c from
// b0 on, each as partners x block rows: (c, i) holds the sum at (b0 + i, c)
// in the *_bc matrices and at (c, b0 + i) in the *_cb ones. `value` is the
// expenditure sum (value_a of AllPairsWeighted); `x` and `y` are the
// index's own: for Fisher the basket sum sum p_c q_b (y unused), for
// Törnqvist sum e_b y_c and sum e_b y_b m_c over the centred log prices y.
// They view the buffers of a GeksWorkspace.
struct BlockSums {
  MatrixMap value_bc{nullptr, 0, 0}, value_cb{nullptr, 0, 0}, x_bc{nullptr, 0, 0},
      x_cb{nullptr, 0, 0}, y_bc{nullptr, 0, 0}, y_cb{nullptr, 0, 0};
};

// The buffers of GeksRows, sized once by the first (widest) block and
// reused by every later block of the same thread: fresh matrices per block
// cost a page fault per 4 KiB of them each time.
struct GeksWorkspace {
  std::unique_ptr<double[]> storage;  // not zeroed: every entry is written before it is read
  size_t capacity = 0;
  Eigen::ArrayXd index_bc, index_cb, log_bc, log_cb;
  // The spreads (GeksFisherAndSpreadsByRowBlocks): L / P from b's and from
  // c's side and their vectorised |ln|.
  Eigen::ArrayXd ratio_b, ratio_c, spread_b, spread_c;
};

// Points `map` at the next rows x cols doubles of `*cursor`.
void TakeMatrix(Eigen::Index rows, Eigen::Index cols, double** cursor, MatrixMap* map) {
  new (map) MatrixMap(*cursor, rows, cols);
  *cursor += rows * cols;
}

// One pair of products of masked arrays: `bc` the transposed block rows of
// left * rightᵀ, `cb` its block columns. Every entry is the full product's
// chain over the headings (bc's with the factors of each term swapped,
// which rounds the same), so it has the full product's bits.
void BlockProduct(const Eigen::MatrixXd& left, const Eigen::MatrixXd& right, Eigen::Index b0,
                  Eigen::Index rows, MatrixMap* bc, MatrixMap* cb) {
  const Eigen::Index cols = left.rows() - b0;
  internal::SetProductTransposed(right.middleRows(b0, cols), left.middleRows(b0, rows), *bc);
  internal::SetProductTransposed(left.middleRows(b0, cols), right.middleRows(b0, rows), *cb);
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

// What a row block gives the spread summary besides the two triangles of
// spreads: its pairs (SpreadBlock) and, for each row a >= b0, the largest
// 100 |ln(L / P)| (std::log) over the partners this block meets, the first
// partner reaching it (as SpreadRows's check), or 0 and -1.
struct SpreadBlockOfGeks {
  SpreadBlock pairs;
  std::vector<double> check_percent;
  std::vector<int> check_partner;
  // Without the medians (SpreadOptions::region_medians false), for each row
  // a >= b0: the largest vectorised spread over the partners this block
  // meets and the first partner reaching it (OfferLargest), or 0 and -1.
  std::vector<double> largest;
  std::vector<int> largest_partner;
};

// Where the spreads of GeksFisherAndSpreadsByRowBlocks go: the vectorised
// |ln(L / P)| of each pair b < c seen from b (`from_b`) and from c
// (`from_c`), packed as Geks's d (with the medians; else null, and each
// row's largest goes to the block); the options; the regions taking part;
// this block's other parts.
struct SpreadTarget {
  double* from_b = nullptr;
  double* from_c = nullptr;
  const SpreadOptions* options = nullptr;
  const std::vector<char>* member = nullptr;
  SpreadBlockOfGeks* block = nullptr;
};

// Offers `percent` of partner `partner` to a row's check as SpreadRows's
// loop does (finite and strictly above the best so far, which starts at 0).
inline void OfferCheck(double percent, int partner, double* best, int* best_partner) {
  if (std::isfinite(percent) && percent > *best) *best = percent, *best_partner = partner;
}

// The spreads of row b = b0 + i against c = b + 1 + t, t < len, from both
// sides, as SpreadRows forms them from the same sums: L = x_bc / v_bc and
// P = v_cb / x_cb seen from b, L = x_cb / v_cb and P = v_bc / x_bc seen
// from c, NaN where either side spends nothing on the matched headings.
void SpreadPairsOfRow(const BlockSums& sums, Eigen::Index n, Eigen::Index b0, Eigen::Index i,
                      Eigen::Index len, GeksWorkspace* work, const SpreadTarget& target) {
  const Eigen::Index b = b0 + i;
  const auto vb = sums.value_bc.col(i).segment(i + 1, len).array();
  const auto vc = sums.value_cb.col(i).segment(i + 1, len).array();
  const auto xb = sums.x_bc.col(i).segment(i + 1, len).array();
  const auto xc = sums.x_cb.col(i).segment(i + 1, len).array();
  // The tail past len stays 1 so that Eigen's vectorised log takes every
  // entry, as it does over SpreadRows's whole row.
  work->ratio_b.setOnes();
  work->ratio_c.setOnes();
  work->ratio_b.head(len) = (xb / vb) / (vc / xc);
  work->ratio_c.head(len) = (xc / vc) / (vb / xb);
  for (Eigen::Index t = 0; t < len; ++t) {
    if (!(vb(t) > 0.0 && vc(t) > 0.0)) work->ratio_b(t) = work->ratio_c(t) = kNaN;
  }
  work->spread_b = work->ratio_b.log().abs();
  work->spread_c = work->ratio_c.log().abs();
  if (target.from_b != nullptr) {
    const size_t row = PackedRow(n, b);
    std::copy_n(work->spread_b.data(), len, target.from_b + row);
    std::copy_n(work->spread_c.data(), len, target.from_c + row);
  } else {
    // Row b meets its partners c ascending; each c meets b after the
    // partners of rows before b, and before its own row: the order in which
    // SummariseSpreadRows visits them.
    const std::vector<char>& member = *target.member;
    double* largest = target.block->largest.data();
    int* partner = target.block->largest_partner.data();
    for (Eigen::Index t = 0; t < len; ++t) {
      const Eigen::Index c = b + 1 + t;
      if (!member[c]) continue;
      OfferLargest(work->spread_b(t), static_cast<int>(c), &largest[i], &partner[i]);
      OfferLargest(work->spread_c(t), static_cast<int>(b), &largest[c - b0], &partner[c - b0]);
    }
  }
  const SpreadOptions& options = *target.options;
  SpreadBlock& pairs = target.block->pairs;
  // The block's checks, indexed by region - b0.
  double* best = target.block->check_percent.data();
  int* best_partner = target.block->check_partner.data();
  const size_t k = static_cast<size_t>(options.num_widest);
  for (Eigen::Index t = 0; t < len; ++t) {
    const Eigen::Index c = b + 1 + t;
    const double s_b = std::abs(std::log(work->ratio_b(t)));
    const double s_c = std::abs(std::log(work->ratio_c(t)));
    OfferCheck(100.0 * s_b, static_cast<int>(c), &best[i], &best_partner[i]);
    OfferCheck(100.0 * s_c, static_cast<int>(b), &best[c - b0], &best_partner[c - b0]);
    if (!std::isfinite(s_b)) continue;
    if (options.keep_pair_spreads) pairs.pair_spreads.push_back(s_b);
    if (k == 0) continue;
    SpreadPairIndices pair;
    pair.a = static_cast<int>(b), pair.b = static_cast<int>(c), pair.spread = s_b;
    // The order reads only the spread and the regions: most pairs stop here.
    if (pairs.widest.size() == k && !WiderPair(pair, pairs.widest.front())) continue;
    pair.laspeyres = xb(t) / vb(t), pair.paasche = vc(t) / xc(t);
    pair.fisher = std::sqrt(pair.laspeyres * pair.paasche);
    pairs.widest.push_back(pair);
    std::push_heap(pairs.widest.begin(), pairs.widest.end(), WiderPair);
    if (pairs.widest.size() > k) {
      std::pop_heap(pairs.widest.begin(), pairs.widest.end(), WiderPair);
      pairs.widest.pop_back();
    }
  }
}

// Rows [b0, b1) of the upper triangle: for each region b taking part
// (`member`) and each c > b, the index at (b, c) and at (c, b), their
// logarithms as Geks takes them (Eigen's vectorised log, as over the whole
// matrix; segments padded to a multiple of 4 so that every entry gets it),
// and d_bc into `packed`; with a `spreads` target, the spreads of the same
// pairs too. Returns false when two members have no index.
bool GeksRows(const GeksInputs& in, const std::vector<char>& member, Eigen::Index b0,
              Eigen::Index b1, double* packed, GeksWorkspace* work,
              const SpreadTarget* spreads = nullptr) {
  const Eigen::Index n = in.mask.rows(), rows = b1 - b0, cols = n - b0;
  const bool fisher = in.index == GeksIndex::kFisher;
  const Eigen::Index num_matrices = fisher ? 4 : 6;
  const size_t needed = static_cast<size_t>(num_matrices * rows * cols);
  if (work->capacity < needed) {
    // Once per thread: its first block is its widest (blocks go in order).
    work->storage.reset(new double[needed]);
    work->capacity = needed;
    internal::AdviseHugePages(work->storage.get(), needed * sizeof(double));
  }
  double* cursor = work->storage.get();
  BlockSums sums;
  TakeMatrix(cols, rows, &cursor, &sums.value_bc);
  TakeMatrix(cols, rows, &cursor, &sums.value_cb);
  TakeMatrix(cols, rows, &cursor, &sums.x_bc);
  TakeMatrix(cols, rows, &cursor, &sums.x_cb);
  BlockProduct(in.expenditure, in.mask, b0, rows, &sums.value_bc, &sums.value_cb);
  if (fisher) {
    BlockProduct(in.first, in.second, b0, rows, &sums.x_bc, &sums.x_cb);
  } else {
    TakeMatrix(cols, rows, &cursor, &sums.y_bc);
    TakeMatrix(cols, rows, &cursor, &sums.y_cb);
    BlockProduct(in.expenditure, in.first, b0, rows, &sums.x_bc, &sums.x_cb);
    BlockProduct(in.second, in.mask, b0, rows, &sums.y_bc, &sums.y_cb);
  }
  const Eigen::Index padded = (cols + 3) / 4 * 4;
  for (Eigen::ArrayXd* a : {&work->index_bc, &work->index_cb, &work->log_bc, &work->log_cb,
                            &work->ratio_b, &work->ratio_c, &work->spread_b, &work->spread_c}) {
    a->resize(padded);
  }
  for (Eigen::Index i = 0; i < rows; ++i) {
    const Eigen::Index b = b0 + i, len = cols - i - 1;
    if (!member[b] || len == 0) continue;
    work->index_bc.setOnes();
    work->index_cb.setOnes();
    PairIndices(in.index, sums, i, len, &work->index_bc, &work->index_cb);
    work->log_bc = work->index_bc.log();
    work->log_cb = work->index_cb.log();
    double* row = packed + PackedRow(n, b);
    for (Eigen::Index t = 0; t < len; ++t) {
      bool linked;
      row[t] = AntisymmetricLog(work->log_bc(t), work->log_cb(t), &linked);
      if (!linked && member[b + 1 + t]) return false;
    }
    if (spreads != nullptr) SpreadPairsOfRow(sums, n, b0, i, len, work, *spreads);
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

// Geks's sum of squared residuals: over the members j = 1, 2, ... and, for
// each, i = 0 .. j - 1, (d_ab - (x_j - x_i))^2 for a = members[i], b =
// members[j], added one after the other in that order. The terms of 64
// columns j at a time are formed along the rows of the triangle (its
// columns lie a row apart) and then added in that order.
double ResidualSumOfSquares(Eigen::Index n, const std::vector<int>& members,
                            const double* packed, const Eigen::VectorXd& x) {
  constexpr int kColumns = 64;
  const int size = static_cast<int>(members.size());
  std::vector<double> terms(static_cast<size_t>(size) * kColumns);  // (i, j - j0)
  double sum_sq = 0.0;
  for (int j0 = 1; j0 < size; j0 += kColumns) {
    const int j1 = std::min(size, j0 + kColumns);
    for (int i = 0; i < j1 - 1; ++i) {
      const Eigen::Index a = members[i];
      const size_t row = PackedRow(n, a);
      double* term = terms.data() + static_cast<size_t>(i) * kColumns;
      for (int j = std::max(j0, i + 1); j < j1; ++j) {
        const double e = packed[row + (members[j] - a - 1)] - (x[j] - x[i]);
        term[j - j0] = e * e;
      }
    }
    for (int j = j0; j < j1; ++j) {
      for (int i = 0; i < j; ++i) sum_sq += terms[static_cast<size_t>(i) * kColumns + (j - j0)];
    }
  }
  return sum_sq;
}

// Row a's spreads from the triangles, partners ascending: b < a from c's
// side (column a of `from_c`), then c > a from b's side (row a of
// `from_b`); regions that take no part have no spread with anyone. Rows
// [a0, a1) at a time, so that the column reads go along rows; `values`
// holds a buffer per row.
void SummariseSpreadRows(Eigen::Index n, Eigen::Index a0, Eigen::Index a1,
                         const std::vector<char>& member, const double* from_b,
                         const double* from_c, std::vector<std::vector<double>>* values,
                         SpreadSummary* out) {
  const Eigen::Index rows = a1 - a0;
  std::vector<double> largest(rows, 0.0);
  std::vector<int> partner(rows, -1);
  auto visit = [&](Eigen::Index r, Eigen::Index with, double spread) {
    if (!std::isfinite(spread)) return;
    (*values)[r].push_back(spread);
    OfferLargest(spread, static_cast<int>(with), &largest[r], &partner[r]);
  };
  for (Eigen::Index r = 0; r < rows; ++r) (*values)[r].clear();
  for (Eigen::Index b = 0; b + 1 < a1; ++b) {
    if (!member[b]) continue;
    const size_t row = PackedRow(n, b);
    for (Eigen::Index a = std::max(a0, b + 1); a < a1; ++a) {
      if (member[a]) visit(a - a0, b, from_c[row + (a - b - 1)]);
    }
  }
  for (Eigen::Index a = a0; a < a1; ++a) {
    if (!member[a]) continue;
    const size_t row = PackedRow(n, a);
    for (Eigen::Index c = a + 1; c < n; ++c) {
      if (member[c]) visit(a - a0, c, from_b[row + (c - a - 1)]);
    }
  }
  for (Eigen::Index r = 0; r < rows; ++r) {
    out->regions[a0 + r] = SummariseRow(&(*values)[r], largest[r], partner[r]);
  }
}

// The spread summary of GeksFisherAndSpreadsByRowBlocks from the triangles
// and the blocks' parts, as AllPairsSpreads gives it.
SpreadSummary SummariseSpreads(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                               const SpreadOptions& options, const std::vector<char>& member,
                               const double* from_b, const double* from_c, int threads,
                               std::vector<SpreadBlockOfGeks>* blocks) {
  const Eigen::Index n = price.rows();
  SpreadSummary out;
  out.regions.resize(n);
  out.check_percent.assign(n, 0.0);
  out.check_partner.assign(n, -1);
  constexpr Eigen::Index kRows = 64;
  const int num_tiles = options.region_medians ? static_cast<int>((n + kRows - 1) / kRows) : 0;
#pragma omp parallel num_threads(threads) if (num_tiles > 1)
  {
    std::vector<std::vector<double>> values(kRows);
#pragma omp for schedule(dynamic, 1)
    for (int k = 0; k < num_tiles; ++k) {
      SummariseSpreadRows(n, k * kRows, std::min(n, (k + 1) * kRows), member, from_b, from_c,
                          &values, &out);
    }
  }
  // A block's partners all come before the next block's, so taking the
  // blocks in order with "strictly above" keeps the first partner; pairs are
  // joined in block order, as AllPairsSpreads joins them.
  std::vector<double> largest(options.region_medians ? 0 : n, 0.0);
  std::vector<int> largest_partner(options.region_medians ? 0 : n, -1);
  for (SpreadBlockOfGeks& block : *blocks) {
    const Eigen::Index b0 = n - static_cast<Eigen::Index>(block.check_partner.size());
    for (size_t r = 0; r < block.check_partner.size(); ++r) {
      if (block.check_partner[r] < 0) continue;
      OfferCheck(block.check_percent[r], block.check_partner[r], &out.check_percent[b0 + r],
                 &out.check_partner[b0 + r]);
    }
    for (size_t r = 0; r < block.largest_partner.size(); ++r) {
      if (block.largest_partner[r] < 0) continue;
      OfferLargest(block.largest[r], block.largest_partner[r], &largest[b0 + r],
                   &largest_partner[b0 + r]);
    }
    out.pair_spreads.insert(out.pair_spreads.end(), block.pairs.pair_spreads.begin(),
                            block.pairs.pair_spreads.end());
    out.widest.insert(out.widest.end(), block.pairs.widest.begin(), block.pairs.widest.end());
    block = SpreadBlockOfGeks();
  }
  if (!options.region_medians) {
    for (Eigen::Index a = 0; a < n; ++a) {
      out.regions[a] = LargestOfRow(largest[a], largest_partner[a]);
    }
  }
  FinishWidest(price, expenditure, options, &out);
  return out;
}

}  // namespace

bool GeksBlockOptions::IsValid(std::string* error) const {
  const std::string message = RowBlockOptionsMessage(block_rows, num_threads, "");
  if (error != nullptr) *error = message;
  return message.empty();
}

namespace {

// GeksByRowBlocks, and with `spread_options` the spreads of the same pairs
// into `spreads` (GeksFisherAndSpreadsByRowBlocks).
bool GeksByRowBlocksImpl(GeksIndex index, const Eigen::MatrixXd& price,
                         const Eigen::MatrixXd& expenditure, const GeksBlockOptions& options,
                         const SpreadOptions* spread_options, GeksResult* result,
                         SpreadSummary* spreads) {
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
  const size_t triangle = PackedRow(n, n);
  const std::unique_ptr<double[]> packed_storage(new double[triangle]);
  double* const packed = packed_storage.get();
  internal::AdviseHugePages(packed, triangle * sizeof(double));
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();
  const Eigen::Index step = options.block_rows;
  const int num_blocks = static_cast<int>((n + step - 1) / step);
  std::vector<char> block_linked(num_blocks, 1);
  // The spreads seen from each side of each pair, and each block's part.
  std::unique_ptr<double[]> from_b, from_c;
  std::vector<SpreadBlockOfGeks> spread_blocks;
  if (spread_options != nullptr && spread_options->region_medians) {
    from_b.reset(new double[triangle]);
    from_c.reset(new double[triangle]);
    internal::AdviseHugePages(from_b.get(), triangle * sizeof(double));
    internal::AdviseHugePages(from_c.get(), triangle * sizeof(double));
  }
  if (spread_options != nullptr) spread_blocks.resize(num_blocks);
  // Each block writes its own entries of the triangles; the sums below run
  // in a fixed order, so the thread count changes nothing.
#pragma omp parallel num_threads(threads) if (num_blocks > 1)
  {
    internal::KeepEigenOnThisThread();
    GeksWorkspace work;
#pragma omp for schedule(dynamic, 1)
    for (int k = 0; k < num_blocks; ++k) {
      const Eigen::Index b0 = k * step;
      SpreadTarget target;
      if (spread_options != nullptr) {
        SpreadBlockOfGeks& block = spread_blocks[k];
        block.check_percent.assign(n - b0, 0.0);
        block.check_partner.assign(n - b0, -1);
        if (!spread_options->region_medians) {
          block.largest.assign(n - b0, 0.0);
          block.largest_partner.assign(n - b0, -1);
        }
        target = {from_b.get(), from_c.get(), spread_options, &member, &block};
      }
      block_linked[k] = GeksRows(in, member, b0, std::min(n, b0 + step), packed, &work,
                                 spread_options != nullptr ? &target : nullptr);
    }
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
  const double sum_sq = ResidualSumOfSquares(n, members, packed, x);
  const long long num_pairs = static_cast<long long>(size) * (size - 1) / 2;
  out.rms_log_residual = std::sqrt(sum_sq / static_cast<double>(num_pairs));
  out.groups.push_back(std::move(members));
  *result = std::move(out);
  if (spread_options != nullptr) {
    *spreads = SummariseSpreads(price, expenditure, *spread_options, member, from_b.get(),
                                from_c.get(), threads, &spread_blocks);
  }
  return true;
}

}  // namespace

bool GeksByRowBlocks(GeksIndex index, const Eigen::MatrixXd& price,
                     const Eigen::MatrixXd& expenditure, const GeksBlockOptions& options,
                     GeksResult* result) {
  return GeksByRowBlocksImpl(index, price, expenditure, options, nullptr, result, nullptr);
}

bool GeksFisherAndSpreadsByRowBlocks(const Eigen::MatrixXd& price,
                                     const Eigen::MatrixXd& expenditure,
                                     const GeksBlockOptions& options,
                                     const SpreadOptions& spread_options, GeksResult* result,
                                     SpreadSummary* spreads) {
  assert(spread_options.IsValid(nullptr));
  return GeksByRowBlocksImpl(GeksIndex::kFisher, price, expenditure, options, &spread_options,
                             result, spreads);
}

}  // namespace paritas
