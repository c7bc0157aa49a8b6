// Bilateral index formulas as straight sums over the matched entries.
//
// Written for clarity rather than speed: these are the reference the
// all-pairs matrix code is tested against, and the per-pair tools (pair
// comparison, contributions) call them on small inputs.
#include "paritas/aggregation/index_formulas.h"

#include <cassert>
#include <cmath>
#include <cstddef>
#include <limits>

#include "base/not_a_number.h"

namespace paritas {
namespace {

// Returns sum_i x_i y_i.
double Dot(std::span<const double> x, std::span<const double> y) {
  assert(x.size() == y.size());
  double sum = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) sum += x[i] * y[i];
  return sum;
}

// Returns ½ (s_a + s_b) ln(p_b / p_a) for one entry; Tornqvist() and
// TornqvistLogContributions() share it so that the contributions sum to the
// log index to the last bit, which the decomposition output relies on.
double TornqvistTerm(double price_a, double price_b, double quantity_a, double quantity_b,
                     double expenditure_a, double expenditure_b) {
  const double share_a = price_a * quantity_a / expenditure_a;
  const double share_b = price_b * quantity_b / expenditure_b;
  return 0.5 * (share_a + share_b) * std::log(price_b / price_a);
}

}  // namespace

double Jevons(std::span<const double> price_a, std::span<const double> price_b) {
  assert(price_a.size() == price_b.size());
  if (price_a.empty()) return kNaN;
  double sum_log = 0.0;
  for (std::size_t i = 0; i < price_a.size(); ++i) sum_log += std::log(price_b[i] / price_a[i]);
  return std::exp(sum_log / static_cast<double>(price_a.size()));
}

double Dutot(std::span<const double> price_a, std::span<const double> price_b) {
  assert(price_a.size() == price_b.size());
  if (price_a.empty()) return kNaN;
  double sum_a = 0.0;
  double sum_b = 0.0;
  for (std::size_t i = 0; i < price_a.size(); ++i) {
    sum_a += price_a[i];
    sum_b += price_b[i];
  }
  // The counts cancel in the ratio of means.
  return sum_b / sum_a;
}

double Carli(std::span<const double> price_a, std::span<const double> price_b) {
  assert(price_a.size() == price_b.size());
  if (price_a.empty()) return kNaN;
  double sum = 0.0;
  for (std::size_t i = 0; i < price_a.size(); ++i) sum += price_b[i] / price_a[i];
  return sum / static_cast<double>(price_a.size());
}

double Laspeyres(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a) {
  assert(price_a.size() == price_b.size() && price_a.size() == quantity_a.size());
  if (price_a.empty()) return kNaN;
  return Dot(price_b, quantity_a) / Dot(price_a, quantity_a);
}

double Paasche(std::span<const double> price_a, std::span<const double> price_b,
               std::span<const double> quantity_b) {
  assert(price_a.size() == price_b.size() && price_a.size() == quantity_b.size());
  if (price_a.empty()) return kNaN;
  return Dot(price_b, quantity_b) / Dot(price_a, quantity_b);
}

double Fisher(std::span<const double> price_a, std::span<const double> price_b,
              std::span<const double> quantity_a, std::span<const double> quantity_b) {
  assert(quantity_a.size() == quantity_b.size());
  if (price_a.empty()) return kNaN;
  return std::sqrt(Laspeyres(price_a, price_b, quantity_a) *
                   Paasche(price_a, price_b, quantity_b));
}

void TornqvistLogContributions(std::span<const double> price_a, std::span<const double> price_b,
                               std::span<const double> quantity_a,
                               std::span<const double> quantity_b, std::span<double> contribution) {
  const std::size_t n = price_a.size();
  assert(price_b.size() == n && quantity_a.size() == n && quantity_b.size() == n &&
         contribution.size() == n);
  const double expenditure_a = Dot(price_a, quantity_a);
  const double expenditure_b = Dot(price_b, quantity_b);
  for (std::size_t i = 0; i < n; ++i) {
    contribution[i] = TornqvistTerm(price_a[i], price_b[i], quantity_a[i], quantity_b[i],
                                    expenditure_a, expenditure_b);
  }
}

double Tornqvist(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a, std::span<const double> quantity_b) {
  const std::size_t n = price_a.size();
  assert(price_b.size() == n && quantity_a.size() == n && quantity_b.size() == n);
  if (n == 0) return kNaN;
  const double expenditure_a = Dot(price_a, quantity_a);
  const double expenditure_b = Dot(price_b, quantity_b);
  double log_index = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    log_index += TornqvistTerm(price_a[i], price_b[i], quantity_a[i], quantity_b[i],
                               expenditure_a, expenditure_b);
  }
  return std::exp(log_index);
}

double Walsh(std::span<const double> price_a, std::span<const double> price_b,
             std::span<const double> quantity_a, std::span<const double> quantity_b) {
  const std::size_t n = price_a.size();
  assert(price_b.size() == n && quantity_a.size() == n && quantity_b.size() == n);
  if (n == 0) return kNaN;
  double sum_a = 0.0;
  double sum_b = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    const double basket = std::sqrt(quantity_a[i] * quantity_b[i]);
    sum_a += price_a[i] * basket;
    sum_b += price_b[i] * basket;
  }
  return sum_b / sum_a;
}

void FisherContributions(std::span<const double> price_a, std::span<const double> price_b,
                         std::span<const double> quantity_a, std::span<const double> quantity_b,
                         std::span<double> contribution) {
  const std::size_t n = price_a.size();
  assert(price_b.size() == n && quantity_a.size() == n && quantity_b.size() == n &&
         contribution.size() == n);
  if (n == 0) return;
  // Van IJzeren's basket q_a + q_b / Q_F turns Fisher into a fixed-basket
  // index, whose change splits additively over entries with the basket's
  // expenditure shares at prices a as weights.
  const double value_aa = Dot(price_a, quantity_a);
  const double value_ba = Dot(price_b, quantity_a);
  const double value_ab = Dot(price_a, quantity_b);
  const double value_bb = Dot(price_b, quantity_b);
  const double fisher_quantity = std::sqrt((value_ab / value_aa) * (value_bb / value_ba));
  double basket_value_a = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    basket_value_a += price_a[i] * (quantity_a[i] + quantity_b[i] / fisher_quantity);
  }
  for (std::size_t i = 0; i < n; ++i) {
    const double basket = quantity_a[i] + quantity_b[i] / fisher_quantity;
    contribution[i] = (price_b[i] - price_a[i]) * basket / basket_value_a;
  }
}

}  // namespace paritas
