// CPD by block elimination of the normal equations. X'WX has a diagonal
// region block, a diagonal item block and a dense region x item block C of
// weight sums; the larger diagonal block is eliminated, the Schur complement
// of the smaller is formed as one matrix product and factorised once, and the
// same factorisation serves the fit and every standard error (solved in
// chunks of contrasts, so no (R + I)^2 inverse is ever formed).
#include "paritas/elementary/cpd.h"

#include <Eigen/Cholesky>
#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <optional>
#include <utility>
#include <vector>

#include "base/dense_products.h"
#include "base/not_a_number.h"
#include "paritas/base/text.h"
#include "elementary/robust_cpd.h"

namespace paritas {
namespace {

// Contrasts solved together when computing standard errors: bounds the
// (R + I) x chunk workspace.
constexpr int kContrastChunk = 256;
// Hat values above this count as 1 under HC3 (see RobustErrors).
constexpr double kLeverageOne = 1.0 - 1e-9;
// The reweighting stops when no effect and no fitted value moves by more
// than this (log points) and the scale changes by less than this share, or
// after kMaxRobustIterations fits.
constexpr double kRobustTolerance = 1e-11;
constexpr int kMaxRobustIterations = 500;

std::string Number(double value) {
  if (std::isnan(value)) return "nan";
  if (std::isinf(value)) return value > 0 ? "inf" : "-inf";
  std::string out;
  AppendShortest(value, &out);
  return out;
}

// Adds each cell's value[k] to its region's sum, its item's sum and its
// (region, item) entry. An item's sum runs in a register while its cells
// follow one another (a heading's cells come by item): the same additions
// in the same order as through memory, without each waiting on the store
// of the one before.
void AddCellSums(const internal::CompressedCells& cells, std::span<const double> value, Eigen::VectorXd* by_region,
                 Eigen::VectorXd* by_item, Eigen::MatrixXd* by_pair) {
  const size_t num_cells = cells.region.size();
  int run_item = num_cells > 0 ? cells.item[0] : 0;
  double item_sum = num_cells > 0 ? (*by_item)[run_item] : 0.0;
  for (size_t k = 0; k < num_cells; ++k) {
    const int r = cells.region[k], i = cells.item[k];
    if (i != run_item) {
      (*by_item)[run_item] = item_sum;
      run_item = i;
      item_sum = (*by_item)[i];
    }
    (*by_region)[r] += value[k];
    item_sum += value[k];
    (*by_pair)(r, i) += value[k];
  }
  if (num_cells > 0) (*by_item)[run_item] = item_sum;
}

// The gauge-fixed normal equations of the CPD model on compressed cells.
// Eliminates items when num_regions <= num_items (the region effect 0 is held
// at 0), regions otherwise (the item effect 0 is held at 0).
class NormalEquations {
 public:
  NormalEquations(const internal::CompressedCells& cells, std::span<const double> weight)
      : num_regions_(cells.num_regions),
        num_items_(cells.num_items),
        eliminate_items_(cells.num_regions <= cells.num_items),
        d_region_(Eigen::VectorXd::Zero(cells.num_regions)),
        d_item_(Eigen::VectorXd::Zero(cells.num_items)),
        c_(Eigen::MatrixXd::Zero(cells.num_regions, cells.num_items)) {
    AddCellSums(cells, weight, &d_region_, &d_item_, &c_);
  }

  // Forms and factorises the reduced Schur complement; false when it is not
  // positive definite (regions not linked, or weights spanning too many
  // orders of magnitude).
  bool Factorize() {
    if (eliminate_items_) {
      const int n = num_regions_ - 1;
      if (n == 0) return true;
      // S = D_r - C D_i^-1 C', without the gauge row and column.
      // The scales formed once (in the product, Eigen's diagonal would form
      // each entry's root and quotient anew: the same values).
      const Eigen::VectorXd item_scale = d_item_.cwiseSqrt().cwiseInverse();
      const Eigen::MatrixXd scaled = c_.bottomRows(n) * item_scale.asDiagonal();
      Eigen::MatrixXd s = Eigen::MatrixXd::Zero(n, n);
      internal::SubtractGramLower(scaled, &s);
      s.diagonal() += d_region_.tail(n);
      llt_.compute(s);
    } else {
      const int n = num_items_ - 1;
      if (n == 0) return true;
      // S = D_i - C' D_r^-1 C, without the gauge row and column; the
      // kernel wants the factor's rows contiguous, so it is stored
      // transposed (n x R).
      const Eigen::VectorXd region_scale = d_region_.cwiseSqrt().cwiseInverse();
      const Eigen::MatrixXd scaled_transposed = (region_scale.asDiagonal() * c_.rightCols(n)).transpose();
      Eigen::MatrixXd s = Eigen::MatrixXd::Zero(n, n);
      internal::SubtractGramLower(scaled_transposed, &s);
      s.diagonal() += d_item_.tail(n);
      llt_.compute(s);
    }
    return llt_.info() == Eigen::Success;
  }

  // Solves X'WX [a; b] = [g; h] in the fixed gauge for m right-hand sides:
  // g is R x m, h is I x m or empty (all zero). The gauge row of the
  // right-hand side is ignored and the gauge entry of the solution is 0.
  void Solve(const Eigen::MatrixXd& g, const Eigen::MatrixXd& h, Eigen::MatrixXd* a,
             Eigen::MatrixXd* b) const {
    const Eigen::Index m = g.cols();
    const bool zero_h = h.size() == 0;
    if (eliminate_items_) {
      Eigen::MatrixXd rhs = g;
      if (!zero_h) rhs.noalias() -= c_ * (d_item_.cwiseInverse().asDiagonal() * h);
      a->setZero(num_regions_, m);
      if (num_regions_ > 1)
        a->bottomRows(num_regions_ - 1) = llt_.solve(rhs.bottomRows(num_regions_ - 1));
      Eigen::MatrixXd rest = -c_.transpose() * (*a);
      if (!zero_h) rest += h;
      *b = d_item_.cwiseInverse().asDiagonal() * rest;
    } else {
      Eigen::MatrixXd rhs = -c_.transpose() * (d_region_.cwiseInverse().asDiagonal() * g);
      if (!zero_h) rhs += h;
      Eigen::MatrixXd item_part = Eigen::MatrixXd::Zero(num_items_, m);
      if (num_items_ > 1)
        item_part.bottomRows(num_items_ - 1) = llt_.solve(rhs.bottomRows(num_items_ - 1));
      Eigen::MatrixXd rest = g;
      rest.noalias() -= c_ * item_part;
      *a = d_region_.cwiseInverse().asDiagonal() * rest;
      *b = std::move(item_part);
    }
  }

  // Returns l_r'(X'WX)^- l_r for every contrast l_r = e_r - reference
  // (gauge invariant, as the entries of l_r sum to 0), without forming any
  // R x R matrix when regions are eliminated: cost min(R, I)^2 x R. With
  // regions eliminated and `region_solution` given, also hands back S^-1 v (the
  // reduced item system's solution for every contrast, (I - 1) x R), which
  // SandwichQuadraticForms would otherwise solve again.
  Eigen::VectorXd ContrastQuadraticForms(const Eigen::VectorXd& reference,
                                         Eigen::MatrixXd* region_solution = nullptr) const {
    Eigen::VectorXd quad = Eigen::VectorXd::Zero(num_regions_);
    if (eliminate_items_) {
      // l_red' S^-1 l_red on the reduced region system, in chunks.
      const int n = num_regions_ - 1;
      for (int first = 0; n > 0 && first < num_regions_; first += kContrastChunk) {
        const int m = std::min(kContrastChunk, num_regions_ - first);
        Eigen::MatrixXd contrast = -reference.tail(n) * Eigen::RowVectorXd::Ones(m);
        for (int j = 0; j < m; ++j) {
          if (first + j > 0) contrast(first + j - 1, j) += 1.0;
        }
        const Eigen::MatrixXd solution = llt_.solve(contrast);
        quad.segment(first, m) = contrast.cwiseProduct(solution).colwise().sum().transpose();
      }
    } else {
      // l'D_r^-1 l + v'S^-1 v with v = C_red' D_r^-1 l = M_red(r, :)' - z.
      const Eigen::VectorXd inv_d = d_region_.cwiseInverse();
      const double base = reference.cwiseAbs2().dot(inv_d);
      quad = inv_d.cwiseProduct(Eigen::VectorXd::Ones(num_regions_) - 2.0 * reference);
      quad.array() += base;
      const int n = num_items_ - 1;
      if (n > 0) {
        const Eigen::MatrixXd m_red = inv_d.asDiagonal() * c_.rightCols(n);
        const Eigen::VectorXd z = m_red.transpose() * reference;
        const Eigen::MatrixXd v = m_red.transpose() - z * Eigen::RowVectorXd::Ones(num_regions_);
        Eigen::MatrixXd y = SolveMany(v);
        quad += v.cwiseProduct(y).colwise().sum().transpose();
        if (region_solution != nullptr) *region_solution = std::move(y);
      }
    }
    return quad;
  }

  // Returns q_r'(meat)q_r with q_r = (X'WX)^- l_r for every contrast
  // l_r = e_r - reference, where meat = sum_k s_k x_k x_k' is given by its
  // blocks (region diagonal, item diagonal, region x item), as
  // sum D_r q_a^2 + sum D_i q_b^2 + 2 q_a' C q_b. With items eliminated the
  // q_r are solved in chunks (cost R^2 I, R the smaller side). With regions
  // eliminated q_r = (v_r - u - M y_r, y_r) with M = D_r^-1 C, u = D_r^-1
  // reference, v_r = e_r / d_r and y_r = -G (M(r, :)' - M' reference), so the
  // forms reduce to I x I products: cost R I^2 instead of R^2 I. Without
  // item 0's row, -y_r is exactly the solution ContrastQuadraticForms forms
  // (the same right-hand side, built by the same operations), so
  // `contrast_solution`, when not empty, is used instead of solving again.
  Eigen::VectorXd SandwichQuadraticForms(const Eigen::VectorXd& reference,
                                         const Eigen::VectorXd& meat_region,
                                         const Eigen::VectorXd& meat_item,
                                         const Eigen::MatrixXd& meat_cross,
                                         const Eigen::MatrixXd& contrast_solution) const {
    Eigen::VectorXd quad(num_regions_);
    if (eliminate_items_) {
      const Eigen::MatrixXd no_item_rhs;
      for (int first = 0; first < num_regions_; first += kContrastChunk) {
        const int m = std::min(kContrastChunk, num_regions_ - first);
        Eigen::MatrixXd contrast = -reference * Eigen::RowVectorXd::Ones(m);
        for (int j = 0; j < m; ++j) contrast(first + j, j) += 1.0;
        Eigen::MatrixXd a, b;
        Solve(contrast, no_item_rhs, &a, &b);
        Eigen::MatrixXd cross;
        internal::SetProduct(meat_cross, b, &cross);
        quad.segment(first, m) = (meat_region.transpose() * a.cwiseAbs2() +
                                  meat_item.transpose() * b.cwiseAbs2() +
                                  2.0 * a.cwiseProduct(cross).colwise().sum())
                                     .transpose();
      }
      return quad;
    }
    const int n = num_items_ - 1;
    const Eigen::VectorXd inv_d = d_region_.cwiseInverse();
    const Eigen::MatrixXd m_mat = inv_d.asDiagonal() * c_;  // R x I
    const Eigen::VectorXd u = inv_d.cwiseProduct(reference);
    const Eigen::VectorXd mu = m_mat.transpose() * reference;
    // Y = -G (M' - mu 1'), I x R, G the gauge-fixed inverse (item 0 held).
    Eigen::MatrixXd y = Eigen::MatrixXd::Zero(num_items_, num_regions_);
    if (n > 0 && contrast_solution.size() > 0) {
      y.bottomRows(n) = -contrast_solution;
    } else if (n > 0) {
      const Eigen::MatrixXd rhs =
          m_mat.rightCols(n).transpose() - mu.tail(n) * Eigen::RowVectorXd::Ones(num_regions_);
      y.bottomRows(n) = -SolveMany(rhs);
    }
    const Eigen::MatrixXd weighted_m = meat_region.asDiagonal() * m_mat;
    // M' stored, so that the kernels read its rows contiguously.
    const Eigen::MatrixXd m_transposed = m_mat.transpose();
    Eigen::MatrixXd p1, p2;
    internal::SetProduct(m_transposed, weighted_m, &p1);  // M' D M
    internal::SetProduct(m_transposed, meat_cross, &p2);  // M' C
    Eigen::MatrixXd p = p1 - 2.0 * p2;
    p.diagonal() += meat_item;
    const Eigen::VectorXd w = 2.0 * (weighted_m.transpose() * u - meat_cross.transpose() * u);
    const double c0 = meat_region.dot(u.cwiseAbs2());
    // Row r of M times y_r, and of the cross block times y_r.
    const Eigen::VectorXd my = m_mat.cwiseProduct(y.transpose()).rowwise().sum();
    const Eigen::VectorXd cy = meat_cross.cwiseProduct(y.transpose()).rowwise().sum();
    Eigen::MatrixXd py;
    internal::SetProduct(p, y, &py);
    const Eigen::VectorXd ypy = y.cwiseProduct(py).colwise().sum().transpose();
    const Eigen::VectorXd wy = (w.transpose() * y).transpose();
    for (int r = 0; r < num_regions_; ++r) {
      const double dr = meat_region[r] * inv_d[r];
      quad[r] = dr * inv_d[r] - 2.0 * dr * u[r] - 2.0 * dr * my[r] + 2.0 * inv_d[r] * cy[r] + c0 +
                wy[r] + ypy[r];
    }
    return quad;
  }

  // Returns S^-1 rhs for the reduced system's right-hand sides (columns),
  // as G rhs with G = S^-1 (n^3 work, n the reduced system's size): for the
  // n x R right-hand sides of the standard errors (R >> n) that is as many
  // operations as the factor's two triangular solves, on the dense kernels.
  Eigen::MatrixXd SolveMany(const Eigen::MatrixXd& rhs) const {
    const Eigen::MatrixXd g = llt_.solve(Eigen::MatrixXd::Identity(rhs.rows(), rhs.rows()));
    Eigen::MatrixXd solution;
    internal::SetProduct(g, rhs, &solution);
    return solution;
  }

  // Returns q_k = x_k'(X'WX)^- x_k of every cell (the hat value is w_k q_k).
  // With A the kept (smaller) side and B the eliminated one, S the Schur
  // complement and G its gauge-fixed inverse, a cell (a, b) has
  // u = e_a - c_b / d_b and q = 1 / d_b + u'G u
  //   = 1 / d_b + G_aa - 2 (G C)_ab / d_b + (C'G C)_bb / d_b^2
  // (u sums to 0, so any generalised inverse gives the same q).
  Eigen::VectorXd CellLeverage(const internal::CompressedCells& cells) const {
    const int m = eliminate_items_ ? num_regions_ : num_items_;
    const Eigen::MatrixXd c = eliminate_items_ ? c_ : Eigen::MatrixXd(c_.transpose());
    const Eigen::VectorXd inverse_d_b = (eliminate_items_ ? d_item_ : d_region_).cwiseInverse();
    Eigen::MatrixXd g = Eigen::MatrixXd::Zero(m, m);
    if (m > 1) g.bottomRightCorner(m - 1, m - 1) = llt_.solve(Eigen::MatrixXd::Identity(m - 1, m - 1));
    Eigen::MatrixXd gc;
    internal::SetProduct(g, c, &gc);
    const Eigen::VectorXd cgc = (c.array() * gc.array()).colwise().sum().transpose();
    Eigen::VectorXd q(static_cast<Eigen::Index>(cells.region.size()));
    for (size_t k = 0; k < cells.region.size(); ++k) {
      const int a = eliminate_items_ ? cells.region[k] : cells.item[k];
      const int b = eliminate_items_ ? cells.item[k] : cells.region[k];
      q[k] = inverse_d_b[b] + g(a, a) - 2.0 * gc(a, b) * inverse_d_b[b] +
             cgc[b] * inverse_d_b[b] * inverse_d_b[b];
    }
    return q;
  }

 private:
  int num_regions_;
  int num_items_;
  bool eliminate_items_;
  Eigen::VectorXd d_region_;  // weight sum of each region
  Eigen::VectorXd d_item_;    // weight sum of each item
  Eigen::MatrixXd c_;         // weight sum of each region x item
  Eigen::LLT<Eigen::MatrixXd> llt_;
};

// Returns the factor u_k / e_k^2 of each cell's sandwich term (see
// RobustErrors): 1 (HC0), n / (n - p) (HC1; NaN without degrees of freedom)
// or 1 / (1 - h_k)^2 (HC3; 0 where h_k is 1).
Eigen::VectorXd SandwichFactors(RobustErrors kind, const NormalEquations& normal,
                                const internal::CompressedCells& cells,
                                std::span<const double> weight, int degrees_of_freedom) {
  const Eigen::Index num_cells = static_cast<Eigen::Index>(cells.region.size());
  switch (kind) {
    case RobustErrors::kHc1:
      return Eigen::VectorXd::Constant(
          num_cells, degrees_of_freedom > 0
                         ? static_cast<double>(num_cells) / degrees_of_freedom
                         : kNaN);
    case RobustErrors::kHc3: {
      Eigen::VectorXd factor = normal.CellLeverage(cells);
      for (Eigen::Index k = 0; k < num_cells; ++k) {
        const double h = weight[k] * factor[k];
        factor[k] = h > kLeverageOne ? 0.0 : 1.0 / ((1.0 - h) * (1.0 - h));
      }
      return factor;
    }
    case RobustErrors::kHc0:
    case RobustErrors::kOff:
      break;
  }
  return Eigen::VectorXd::Ones(num_cells);
}

// Standard errors of a_r - sum_s w_s a_s for every compressed region, from
// the normal equations with weights `weight` and residuals `residual`.
// Classic: sigma2 l'(X'WX)^- l. Sandwich:
// l'A^- (sum_k w_k^2 u_k x_k x_k') A^- l with u_k as `kind` says.
void StandardErrors(const NormalEquations& normal, const internal::CompressedCells& cells,
                    std::span<const double> weight, const Eigen::VectorXd& residual,
                    const Eigen::VectorXd& reference, double sigma2, bool classic,
                    RobustErrors kind, int degrees_of_freedom, Eigen::VectorXd* se,
                    Eigen::VectorXd* se_robust) {
  const int num_regions = cells.num_regions;
  se->setConstant(num_regions, kNaN);
  se_robust->setConstant(num_regions, kNaN);
  const bool classic_defined = classic && std::isfinite(sigma2);
  const bool robust = kind != RobustErrors::kOff;
  if (!classic_defined && !robust) return;
  // The contrasts' solution, shared by the classic and the sandwich forms.
  Eigen::MatrixXd contrast_solution;
  if (classic_defined) {
    const Eigen::VectorXd quad =
        normal.ContrastQuadraticForms(reference, robust ? &contrast_solution : nullptr);
    for (int r = 0; r < num_regions; ++r) (*se)[r] = std::sqrt(std::max(0.0, sigma2 * quad[r]));
  }
  if (!robust) return;
  // w_k^2 u_k
  Eigen::VectorXd score_weight = SandwichFactors(kind, normal, cells, weight, degrees_of_freedom);
  for (Eigen::Index k = 0; k < residual.size(); ++k) {
    score_weight[k] *= weight[k] * weight[k] * residual[k] * residual[k];
  }
  // The meat sum_k s_k x_k x_k' has the block structure of X'WX.
  const int num_items = cells.num_items;
  Eigen::VectorXd meat_region = Eigen::VectorXd::Zero(num_regions);
  Eigen::VectorXd meat_item = Eigen::VectorXd::Zero(num_items);
  Eigen::MatrixXd meat_cross = Eigen::MatrixXd::Zero(num_regions, num_items);
  AddCellSums(cells, std::span<const double>(score_weight.data(), static_cast<size_t>(score_weight.size())),
              &meat_region, &meat_item, &meat_cross);
  const Eigen::VectorXd quad = normal.SandwichQuadraticForms(reference, meat_region, meat_item,
                                                             meat_cross, contrast_solution);
  for (int r = 0; r < num_regions; ++r) (*se_robust)[r] = std::sqrt(std::max(0.0, quad[r]));
}

// Huber's sandwich errors of a robust fit (CpdResult::log_se): `normal`
// holds the cell weights, `residual` the final residuals, `sigma` the scale
// s the residuals were standardised by.
Eigen::VectorXd HuberSandwichErrors(const NormalEquations& normal,
                                    const internal::CompressedCells& cells,
                                    const Eigen::VectorXd& residual, const Eigen::VectorXd& reference,
                                    CpdLoss loss, double sigma, int degrees_of_freedom) {
  Eigen::VectorXd se = Eigen::VectorXd::Constant(cells.num_regions, kNaN);
  const int n = static_cast<int>(cells.region.size());
  if (degrees_of_freedom <= 0 || !(sigma > 0.0)) return se;
  const double c = internal::TuningConstant(loss);
  double sum_psi2 = 0.0, sum_d = 0.0, sum_d2 = 0.0;
  for (int k = 0; k < n; ++k) {
    const double z = std::sqrt(cells.weight[k]) * residual[k] / sigma;
    const double psi = internal::Psi(loss, c, z);
    const double d = internal::PsiDerivative(loss, c, z);
    sum_psi2 += psi * psi;
    sum_d += d;
    sum_d2 += d * d;
  }
  const double mean_d = sum_d / n;
  if (!(std::abs(mean_d) > 0.0)) return se;
  const double var_d = std::max(0.0, sum_d2 / n - mean_d * mean_d);
  const int p = n - degrees_of_freedom;
  const double k_factor = 1.0 + static_cast<double>(p) / n * var_d / (mean_d * mean_d);
  const double scale = k_factor * k_factor * (sum_psi2 / degrees_of_freedom) * sigma * sigma /
                       (mean_d * mean_d);
  const Eigen::VectorXd quad = normal.ContrastQuadraticForms(reference);
  for (int r = 0; r < cells.num_regions; ++r) se[r] = std::sqrt(std::max(0.0, scale * quad[r]));
  return se;
}

// Checks the cells; returns an empty string when they are usable.
std::string CheckData(const CpdData& data, const CpdOptions& options) {
  if (data.num_regions < 0 || data.num_items < 0) {
    return "num_regions (" + std::to_string(data.num_regions) + ") and num_items (" +
           std::to_string(data.num_items) + ") must not be negative";
  }
  const size_t n = data.region.size();
  if (data.item.size() != n || data.log_price.size() != n ||
      (!data.weight.empty() && data.weight.size() != n)) {
    return "cell arrays differ in length: region " + std::to_string(n) + ", item " +
           std::to_string(data.item.size()) + ", log_price " +
           std::to_string(data.log_price.size()) + ", weight " +
           std::to_string(data.weight.size()) + " (0 allowed)";
  }
  for (size_t k = 0; k < n; ++k) {
    // Built only on failure: formatting it for every cell cost more than the fit.
    auto cell = [k]() { return "cell " + std::to_string(k) + ": "; };
    if (data.region[k] < 0 || data.region[k] >= data.num_regions) {
      return cell() + "region index " + std::to_string(data.region[k]) + " is outside 0.." +
             std::to_string(data.num_regions - 1);
    }
    if (data.item[k] < 0 || data.item[k] >= data.num_items) {
      return cell() + "item index " + std::to_string(data.item[k]) + " is outside 0.." +
             std::to_string(data.num_items - 1);
    }
    if (!std::isfinite(data.log_price[k])) {
      return cell() + "log price " + Number(data.log_price[k]) + " is not finite";
    }
    if (!data.weight.empty() && !(std::isfinite(data.weight[k]) && data.weight[k] > 0.0)) {
      return cell() + "weight " + Number(data.weight[k]) + " is not a positive number";
    }
  }
  if (!options.reference_weights.empty() &&
      static_cast<int>(options.reference_weights.size()) != data.num_regions) {
    return "reference_weights has " + std::to_string(options.reference_weights.size()) +
           " entries; the heading has " + std::to_string(data.num_regions) + " regions";
  }
  return "";
}

void AppendNote(const std::string& note, std::string* message) {
  if (note.empty()) return;
  if (!message->empty()) *message += "; ";
  *message += note;
}

// A result with every array sized and NaN, as returned when the fit fails.
CpdResult EmptyResult(const CpdData& data) {
  CpdResult result;
  const int num_cells = static_cast<int>(data.region.size());
  result.num_cells = num_cells;
  result.sigma2 = kNaN;
  const int num_regions = std::max(data.num_regions, 0);
  const int num_items = std::max(data.num_items, 0);
  result.log_parity.setConstant(num_regions, kNaN);
  result.item_effect.setConstant(num_items, kNaN);
  result.log_se.setConstant(num_regions, kNaN);
  result.log_se_robust.setConstant(num_regions, kNaN);
  result.fitted.setConstant(num_cells, kNaN);
  result.residual.setConstant(num_cells, kNaN);
  return result;
}

// The regions and items that have cells, numbered in their order.
struct Renumbering {
  std::vector<int> region_index;  // original -> compressed (-1 when absent)
  std::vector<int> item_index;
  std::vector<int> region_of;  // compressed -> original
  std::vector<int> item_of;
};

Renumbering RenumberPresent(const CpdData& data, int num_regions, int num_items) {
  const int num_cells = static_cast<int>(data.region.size());
  Renumbering n;
  n.region_index.assign(num_regions, -1);
  n.item_index.assign(num_items, -1);
  for (int k = 0; k < num_cells; ++k) {
    n.region_index[data.region[k]] = 0;
    n.item_index[data.item[k]] = 0;
  }
  for (int r = 0; r < num_regions; ++r) {
    if (n.region_index[r] == 0) {
      n.region_index[r] = static_cast<int>(n.region_of.size());
      n.region_of.push_back(r);
    }
  }
  for (int i = 0; i < num_items; ++i) {
    if (n.item_index[i] == 0) {
      n.item_index[i] = static_cast<int>(n.item_of.size());
      n.item_of.push_back(i);
    }
  }
  return n;
}

// Says why parities are not identified when the regions form several groups.
std::string GroupsMessage(const std::vector<std::vector<int>>& groups) {
  std::string sizes;
  for (const auto& g : groups) {
    if (!sizes.empty()) sizes += ", ";
    sizes += std::to_string(g.size());
  }
  return "the regions form " + std::to_string(groups.size()) +
         " groups that share no item (sizes " + sizes +
         "); parities are defined only within a group";
}

// The cells in the compressed numbering, with their weights (1 when the data
// give none); CompressedCells views these arrays.
struct CellArrays {
  std::vector<int> region;
  std::vector<int> item;
  std::vector<double> weight;
};

CellArrays CompressCells(const CpdData& data, const Renumbering& n) {
  const int num_cells = static_cast<int>(data.region.size());
  CellArrays c;
  c.region.resize(num_cells);
  c.item.resize(num_cells);
  c.weight.assign(num_cells, 1.0);
  for (int k = 0; k < num_cells; ++k) {
    c.region[k] = n.region_index[data.region[k]];
    c.item[k] = n.item_index[data.item[k]];
    if (!data.weight.empty()) c.weight[k] = data.weight[k];
  }
  return c;
}

// Solves the weighted least-squares fit for the region effects a and the
// item effects b (region 0 or item 0 held at 0, as `normal` fixes it).
void SolveLeastSquares(const NormalEquations& normal, const internal::CompressedCells& cells,
                       Eigen::VectorXd* a, Eigen::VectorXd* b) {
  const int num_cells = static_cast<int>(cells.region.size());
  Eigen::MatrixXd g = Eigen::MatrixXd::Zero(cells.num_regions, 1);
  Eigen::MatrixXd h = Eigen::MatrixXd::Zero(cells.num_items, 1);
  for (int k = 0; k < num_cells; ++k) {
    g(cells.region[k], 0) += cells.weight[k] * cells.log_price[k];
    h(cells.item[k], 0) += cells.weight[k] * cells.log_price[k];
  }
  Eigen::MatrixXd a_solution;
  Eigen::MatrixXd b_solution;
  normal.Solve(g, h, &a_solution, &b_solution);
  *a = a_solution.col(0);
  *b = b_solution.col(0);
}

// Returns ln p - a_r - b_i of every cell.
Eigen::VectorXd Residuals(const internal::CompressedCells& cells, const Eigen::VectorXd& a,
                          const Eigen::VectorXd& b) {
  const int num_cells = static_cast<int>(cells.region.size());
  Eigen::VectorXd e(num_cells);
  for (int k = 0; k < num_cells; ++k) {
    e[k] = cells.log_price[k] - a[cells.region[k]] - b[cells.item[k]];
  }
  return e;
}

// Returns the scale s of the whitened residuals sqrt(w) e: the MAD about 0
// (statsmodels' RLM default), or their root mean square when more than half
// of them vanish (cells that alone fix an item have residual 0), so the
// loss still has a scale.
double ResidualScale(const internal::CompressedCells& cells, const Eigen::VectorXd& e) {
  const int num_cells = static_cast<int>(cells.region.size());
  std::vector<double> whitened(num_cells);
  double sum = 0.0;
  for (int k = 0; k < num_cells; ++k) {
    whitened[k] = std::sqrt(cells.weight[k]) * e[k];
    sum += whitened[k] * whitened[k];
  }
  const double mad = internal::MadAboutZero(whitened);
  return mad > 0.0 ? mad : std::sqrt(sum / num_cells);
}

// The state of the reweighting loop.
struct RobustState {
  double sigma = 0.0;  // scale s of the current residuals
  int num_fits = 0;
  bool settled = false;
};

// One reweighted fit: weights w psi(r)/r from the current residuals and
// the loss threshold (c s), then the weighted least-squares solve; returns
// false when its normal equations are singular.
bool ReweightedFit(const CpdOptions& options, const internal::CompressedCells& cells,
                   double threshold, Eigen::VectorXd* a, Eigen::VectorXd* b, Eigen::VectorXd* e,
                   std::vector<double>* weight) {
  const int num_cells = static_cast<int>(cells.region.size());
  for (int k = 0; k < num_cells; ++k) {
    const double w = cells.weight[k];
    (*weight)[k] =
        w * internal::RobustWeightFactor(options.loss, threshold, std::sqrt(w) * (*e)[k]);
  }
  internal::CompressedCells reweighted = cells;
  reweighted.weight = *weight;
  NormalEquations normal(reweighted, *weight);
  if (!normal.Factorize()) return false;
  SolveLeastSquares(normal, reweighted, a, b);
  *e = Residuals(cells, *a, *b);
  return true;
}

// Refits a, b and the residuals e with the robust loss by iteratively
// reweighted least squares from the least-squares fit, re-estimating the
// scale from the new residuals after every fit (the order of statsmodels'
// RLM.fit) until effects and scale settle. Sets the final reweighted cell
// weights `se_weight` and their normal equations, which the sandwich errors
// use, and *sigma to the final scale. Returns false with result->message set
// when a fit fails.
bool RefitRobust(const CpdOptions& options, const internal::CompressedCells& cells,
                 Eigen::VectorXd* a, Eigen::VectorXd* b, Eigen::VectorXd* e,
                 std::vector<double>* se_weight, std::optional<NormalEquations>* robust_normal,
                 double* sigma, CpdResult* result) {
  const bool fixed = options.robust_scale > 0.0;
  const double c = internal::TuningConstant(options.loss);
  RobustState state;
  state.sigma = fixed ? options.robust_scale / c : ResidualScale(cells, *e);
  *sigma = 0.0;
  if (!(state.sigma > 0.0)) {
    AppendNote("the least-squares fit is exact, so the robust loss changes nothing",
               &result->message);
    return true;
  }
  std::vector<double> weight(cells.region.size());
  while (state.num_fits < kMaxRobustIterations) {
    const Eigen::VectorXd a_before = *a, b_before = *b;
    const double threshold = fixed ? options.robust_scale : c * state.sigma;
    if (!ReweightedFit(options, cells, threshold, a, b, e, &weight)) {
      result->message = "the reweighted CPD normal equations are numerically singular";
      return false;
    }
    ++state.num_fits;
    const double next = fixed ? state.sigma : ResidualScale(cells, *e);
    const double moved = std::max((*a - a_before).cwiseAbs().maxCoeff(),
                                  (*b - b_before).cwiseAbs().maxCoeff());
    const double scale_change = std::abs(next - state.sigma) / state.sigma;
    state.sigma = next;
    if (!(state.sigma > 0.0)) break;
    if (moved <= kRobustTolerance && scale_change <= kRobustTolerance) {
      state.settled = true;
      break;
    }
  }
  if (!state.settled && state.sigma > 0.0) {
    AppendNote("robust CPD: the reweighting did not settle within " +
                   std::to_string(kMaxRobustIterations) + " fits; the last fit is used",
               &result->message);
  }
  result->num_robust_iterations = state.num_fits;
  *sigma = state.sigma;
  result->robust_scale_used = fixed ? options.robust_scale : c * state.sigma;
  const int num_cells = static_cast<int>(cells.region.size());
  for (int k = 0; k < num_cells; ++k) {
    const double w = cells.weight[k];
    (*se_weight)[k] = w * internal::RobustWeightFactor(options.loss, result->robust_scale_used,
                                                       std::sqrt(w) * (*e)[k]);
  }
  robust_normal->emplace(cells, *se_weight);
  if (!(*robust_normal)->Factorize()) {
    result->message = "the reweighted CPD normal equations are numerically singular";
    return false;
  }
  return true;
}

// Returns sum w e^2 / degrees of freedom, or NaN without degrees of freedom.
double ResidualVariance(const std::vector<double>& weight, const Eigen::VectorXd& e,
                        int degrees_of_freedom) {
  if (degrees_of_freedom <= 0) return kNaN;
  double sum = 0.0;
  for (size_t k = 0; k < weight.size(); ++k) sum += weight[k] * e[k] * e[k];
  return sum / degrees_of_freedom;
}

// The reference: the given weights over the regions present, renormalised;
// the plain mean when none is given or none of them is positive (noted).
Eigen::VectorXd ReferenceWeights(const CpdOptions& options, const std::vector<int>& region_of,
                                 std::string* message) {
  const int num_r = static_cast<int>(region_of.size());
  Eigen::VectorXd reference = Eigen::VectorXd::Constant(num_r, 1.0 / num_r);
  if (options.reference_weights.empty()) return reference;
  Eigen::VectorXd given(num_r);
  for (int r = 0; r < num_r; ++r) given[r] = options.reference_weights[region_of[r]];
  if (given.sum() > 0.0) {
    reference = given / given.sum();
  } else {
    AppendNote(
        "no region with a positive reference weight has cells; parities are relative to "
        "the plain mean of the regions present",
        message);
  }
  return reference;
}

// Writes the effects, standard errors, fitted values and residuals back in
// the original numbering.
void StoreFit(const CpdData& data, const Renumbering& n, const internal::CompressedCells& cells,
              const Eigen::VectorXd& a, const Eigen::VectorXd& b, const Eigen::VectorXd& se,
              const Eigen::VectorXd& se_robust, CpdResult* result) {
  for (int r = 0; r < cells.num_regions; ++r) {
    result->log_parity[n.region_of[r]] = a[r];
    result->log_se[n.region_of[r]] = se[r];
    result->log_se_robust[n.region_of[r]] = se_robust[r];
  }
  for (int i = 0; i < cells.num_items; ++i) result->item_effect[n.item_of[i]] = b[i];
  const int num_cells = static_cast<int>(cells.region.size());
  for (int k = 0; k < num_cells; ++k) {
    result->fitted[k] = a[cells.region[k]] + b[cells.item[k]];
    result->residual[k] = data.log_price[k] - result->fitted[k];
  }
}

}  // namespace

std::string ToString(CpdLoss loss) {
  switch (loss) {
    case CpdLoss::kLeastSquares:
      return "least-squares";
    case CpdLoss::kHuber:
      return "huber";
    case CpdLoss::kCauchy:
      return "cauchy";
  }
  return "?";
}

bool FromString(const std::string& text, CpdLoss* loss) {
  const std::string lower = ToLower(Trim(text));
  for (CpdLoss candidate : {CpdLoss::kLeastSquares, CpdLoss::kHuber, CpdLoss::kCauchy}) {
    if (lower == ToString(candidate)) {
      *loss = candidate;
      return true;
    }
  }
  return false;
}

std::string ToString(RobustErrors kind) {
  switch (kind) {
    case RobustErrors::kOff:
      return "off";
    case RobustErrors::kHc0:
      return "hc0";
    case RobustErrors::kHc1:
      return "hc1";
    case RobustErrors::kHc3:
      return "hc3";
  }
  return "?";
}

bool FromString(const std::string& text, RobustErrors* kind) {
  const std::string lower = ToLower(Trim(text));
  for (RobustErrors candidate :
       {RobustErrors::kOff, RobustErrors::kHc0, RobustErrors::kHc1, RobustErrors::kHc3}) {
    if (lower == ToString(candidate)) {
      *kind = candidate;
      return true;
    }
  }
  return false;
}

bool CpdOptions::IsValid(std::string* error) const {
  if (loss != CpdLoss::kLeastSquares && loss != CpdLoss::kHuber && loss != CpdLoss::kCauchy) {
    *error = "loss is " + std::to_string(static_cast<int>(loss)) +
             "; it must be least-squares, huber or cauchy";
    return false;
  }
  if (robust_errors != RobustErrors::kOff && robust_errors != RobustErrors::kHc0 &&
      robust_errors != RobustErrors::kHc1 && robust_errors != RobustErrors::kHc3) {
    *error = "robust_errors is " + std::to_string(static_cast<int>(robust_errors)) +
             "; it must be off, hc0, hc1 or hc3";
    return false;
  }
  if (!std::isfinite(robust_scale) || robust_scale < 0.0) {
    *error = "robust_scale is " + Number(robust_scale) +
             "; it must be 0 (estimate it) or a positive number of log points";
    return false;
  }
  double sum = 0.0;
  for (size_t r = 0; r < reference_weights.size(); ++r) {
    const double w = reference_weights[r];
    if (!std::isfinite(w) || w < 0.0) {
      *error = "reference_weights[" + std::to_string(r) + "] is " + Number(w) +
               "; reference weights must be finite and >= 0";
      return false;
    }
    sum += w;
  }
  if (!reference_weights.empty() && !(sum > 0.0)) {
    *error = "reference_weights are all 0; at least one region needs a positive weight";
    return false;
  }
  return true;
}

std::vector<std::vector<int>> LinkedRegionGroups(int num_regions, int num_items,
                                                 std::span<const int> region,
                                                 std::span<const int> item) {
  num_regions = std::max(num_regions, 0);
  num_items = std::max(num_items, 0);
  std::vector<int> parent(num_regions);
  std::iota(parent.begin(), parent.end(), 0);
  auto find = [&parent](int x) {
    while (parent[x] != x) {
      parent[x] = parent[parent[x]];
      x = parent[x];
    }
    return x;
  };
  std::vector<char> present(num_regions, 0);
  std::vector<int> first_region(num_items, -1);  // first region seen pricing the item
  const size_t n = std::min(region.size(), item.size());
  for (size_t k = 0; k < n; ++k) {
    const int r = region[k];
    const int i = item[k];
    if (r < 0 || r >= num_regions || i < 0 || i >= num_items) continue;
    present[r] = 1;
    if (first_region[i] < 0) {
      first_region[i] = r;
      continue;
    }
    int x = find(r);
    int y = find(first_region[i]);
    if (x == y) continue;
    if (x < y) std::swap(x, y);
    parent[x] = y;  // smaller index as root keeps the result deterministic
  }
  std::vector<std::vector<int>> by_root(num_regions);
  for (int r = 0; r < num_regions; ++r) {
    if (present[r]) by_root[find(r)].push_back(r);
  }
  std::vector<std::vector<int>> groups;
  for (auto& g : by_root) {
    if (!g.empty()) groups.push_back(std::move(g));
  }
  std::stable_sort(groups.begin(), groups.end(),
                   [](const std::vector<int>& x, const std::vector<int>& y) {
                     if (x.size() != y.size()) return x.size() > y.size();
                     return x.front() < y.front();
                   });
  return groups;
}

CpdResult FitCpd(const CpdData& data, const CpdOptions& options) {
  CpdResult result = EmptyResult(data);
  const int num_cells = result.num_cells;
  std::string error;
  if (!options.IsValid(&error)) {
    result.message = "invalid CPD options: " + error;
    return result;
  }
  error = CheckData(data, options);
  if (!error.empty()) {
    result.message = error;
    return result;
  }
  if (num_cells == 0) {
    result.message = "the heading has no cells";
    return result;
  }

  const int num_regions = std::max(data.num_regions, 0);
  const int num_items = std::max(data.num_items, 0);
  const Renumbering present = RenumberPresent(data, num_regions, num_items);
  const int num_r = static_cast<int>(present.region_of.size());
  const int num_i = static_cast<int>(present.item_of.size());
  result.num_regions_present = num_r;
  result.num_items_present = num_i;
  result.degrees_of_freedom = num_cells - num_r - num_i + 1;
  result.groups = LinkedRegionGroups(num_regions, num_items, data.region, data.item);
  if (result.groups.size() > 1) {
    result.message = GroupsMessage(result.groups);
    return result;
  }

  const CellArrays arrays = CompressCells(data, present);
  const internal::CompressedCells cells{num_r,       num_i,          arrays.region,
                                        arrays.item, data.log_price, arrays.weight};
  NormalEquations normal(cells, arrays.weight);
  if (!normal.Factorize()) {
    result.message =
        "the CPD normal equations are numerically singular; check for weights spanning "
        "many orders of magnitude";
    return result;
  }
  Eigen::VectorXd a;
  Eigen::VectorXd b;
  SolveLeastSquares(normal, cells, &a, &b);
  Eigen::VectorXd e = Residuals(cells, a, b);

  // Weights behind the standard errors: the cell weights, or for a robust
  // loss the reweighted ones at convergence.
  std::vector<double> se_weight = arrays.weight;
  std::optional<NormalEquations> robust_normal;
  double sigma = 0.0;
  const bool robust = options.loss != CpdLoss::kLeastSquares;
  if (robust &&
      !RefitRobust(options, cells, &a, &b, &e, &se_weight, &robust_normal, &sigma, &result)) {
    return result;
  }
  result.sigma2 = ResidualVariance(se_weight, e, result.degrees_of_freedom);

  const Eigen::VectorXd reference = ReferenceWeights(options, present.region_of, &result.message);
  const double shift = reference.dot(a);
  a.array() -= shift;
  b.array() += shift;

  Eigen::VectorXd se;
  Eigen::VectorXd se_robust;
  // A robust fit that changed nothing (exact fit) keeps the classic errors.
  const bool huber_errors = robust && robust_normal.has_value();
  StandardErrors(robust_normal ? *robust_normal : normal, cells, se_weight, e, reference,
                 result.sigma2, options.compute_standard_errors && !huber_errors,
                 options.robust_errors, result.degrees_of_freedom, &se, &se_robust);
  if (huber_errors && options.compute_standard_errors) {
    se = HuberSandwichErrors(normal, cells, e, reference, options.loss, sigma,
                             result.degrees_of_freedom);
  }
  StoreFit(data, present, cells, a, b, se, se_robust, &result);
  result.identified = true;
  return result;
}

}  // namespace paritas
