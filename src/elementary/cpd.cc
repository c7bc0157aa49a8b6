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

#include "paritas/base/text.h"
#include "elementary/robust_cpd.h"

namespace paritas {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Contrasts solved together when computing standard errors: bounds the
// (R + I) x chunk workspace.
constexpr int kContrastChunk = 256;
// 1 / Phi^-1(3/4): makes the median absolute deviation a consistent
// estimate of a normal standard deviation.
constexpr double kMadToSigma = 1.4826;
// Tuning constants for 95 % asymptotic efficiency under normal errors:
// Huber 1.345 (Huber 1981), Cauchy 2.385 (Holland and Welsch 1977). Common
// practice for M-estimation.
constexpr double kHuberTuning = 1.345;
constexpr double kCauchyTuning = 2.385;

std::string Number(double value) {
  if (std::isnan(value)) return "nan";
  if (std::isinf(value)) return value > 0 ? "inf" : "-inf";
  std::string out;
  AppendShortest(value, &out);
  return out;
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
    for (size_t k = 0; k < cells.region.size(); ++k) {
      d_region_[cells.region[k]] += weight[k];
      d_item_[cells.item[k]] += weight[k];
      c_(cells.region[k], cells.item[k]) += weight[k];
    }
  }

  // Forms and factorises the reduced Schur complement; false when it is not
  // positive definite (regions not linked, or weights spanning too many
  // orders of magnitude).
  bool Factorize() {
    if (eliminate_items_) {
      const int n = num_regions_ - 1;
      if (n == 0) return true;
      // S = D_r - C D_i^-1 C', without the gauge row and column.
      const Eigen::MatrixXd scaled =
          c_.bottomRows(n) * d_item_.cwiseSqrt().cwiseInverse().asDiagonal();
      Eigen::MatrixXd s = Eigen::MatrixXd::Zero(n, n);
      s.selfadjointView<Eigen::Lower>().rankUpdate(scaled, -1.0);
      s.diagonal() += d_region_.tail(n);
      llt_.compute(s);
    } else {
      const int n = num_items_ - 1;
      if (n == 0) return true;
      // S = D_i - C' D_r^-1 C, without the gauge row and column.
      const Eigen::MatrixXd scaled =
          d_region_.cwiseSqrt().cwiseInverse().asDiagonal() * c_.rightCols(n);
      Eigen::MatrixXd s = Eigen::MatrixXd::Zero(n, n);
      s.selfadjointView<Eigen::Lower>().rankUpdate(scaled.transpose(), -1.0);
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
  // R x R matrix when regions are eliminated: cost min(R, I)^2 x R.
  Eigen::VectorXd ContrastQuadraticForms(const Eigen::VectorXd& reference) const {
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
        const Eigen::MatrixXd y = llt_.solve(v);
        quad += v.cwiseProduct(y).colwise().sum().transpose();
      }
    }
    return quad;
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

// Median of a copy (upper median for an even count, which is deterministic
// and enough for a scale).
double Median(std::vector<double> values) {
  const size_t mid = values.size() / 2;
  std::nth_element(values.begin(), values.begin() + mid, values.end());
  return values[mid];
}

// Standard errors of a_r - sum_s w_s a_s for every compressed region, from
// the normal equations with weights `weight` and residuals `residual`.
// Classic: sigma2 l'(X'WX)^- l. HC0: l'A^- (sum_k w_k^2 e_k^2 x_k x_k') A^- l.
void StandardErrors(const NormalEquations& normal, const internal::CompressedCells& cells,
                    std::span<const double> weight, const Eigen::VectorXd& residual,
                    const Eigen::VectorXd& reference, double sigma2, bool classic, bool robust,
                    Eigen::VectorXd* se, Eigen::VectorXd* se_robust) {
  const int num_regions = cells.num_regions;
  se->setConstant(num_regions, kNaN);
  se_robust->setConstant(num_regions, kNaN);
  const bool classic_defined = classic && std::isfinite(sigma2);
  if (!classic_defined && !robust) return;
  if (classic_defined) {
    const Eigen::VectorXd quad = normal.ContrastQuadraticForms(reference);
    for (int r = 0; r < num_regions; ++r) (*se)[r] = std::sqrt(std::max(0.0, sigma2 * quad[r]));
  }
  if (!robust) return;
  Eigen::VectorXd score_weight(residual.size());  // w_k^2 e_k^2
  for (Eigen::Index k = 0; k < residual.size(); ++k) {
    score_weight[k] = weight[k] * weight[k] * residual[k] * residual[k];
  }
  const Eigen::MatrixXd no_item_rhs;
  for (int first = 0; first < num_regions; first += kContrastChunk) {
    const int m = std::min(kContrastChunk, num_regions - first);
    // Column j is the contrast e_{first+j} - reference.
    Eigen::MatrixXd contrast = -reference * Eigen::RowVectorXd::Ones(m);
    for (int j = 0; j < m; ++j) contrast(first + j, j) += 1.0;
    Eigen::MatrixXd a;
    Eigen::MatrixXd b;
    normal.Solve(contrast, no_item_rhs, &a, &b);
    // x_k' q_j = q_a(r_k, j) + q_b(i_k, j), read by rows.
    const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> a_rows = a;
    const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> b_rows = b;
    Eigen::RowVectorXd sum = Eigen::RowVectorXd::Zero(m);
    for (size_t k = 0; k < cells.region.size(); ++k) {
      sum += score_weight[k] *
             (a_rows.row(cells.region[k]) + b_rows.row(cells.item[k])).array().square().matrix();
    }
    for (int j = 0; j < m; ++j) (*se_robust)[first + j] = std::sqrt(std::max(0.0, sum[j]));
  }
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

// The scale of the robust loss: as given, or the tuning constant times the
// normalised median absolute deviation of the weighted residuals `e`.
double RobustScale(const CpdOptions& options, const internal::CompressedCells& cells,
                   const Eigen::VectorXd& e) {
  if (options.robust_scale > 0.0) return options.robust_scale;
  const int num_cells = static_cast<int>(cells.region.size());
  std::vector<double> scaled(num_cells);
  for (int k = 0; k < num_cells; ++k) scaled[k] = std::sqrt(cells.weight[k]) * e[k];
  const double median = Median(scaled);
  for (double& v : scaled) v = std::abs(v - median);
  double sigma = kMadToSigma * Median(scaled);
  if (!(sigma > 0.0)) {
    // More than half the residuals vanish; fall back to their root mean square.
    double sum = 0.0;
    for (int k = 0; k < num_cells; ++k) sum += cells.weight[k] * e[k] * e[k];
    sigma = std::sqrt(sum / num_cells);
  }
  return sigma * (options.loss == CpdLoss::kHuber ? kHuberTuning : kCauchyTuning);
}

// Refits a, b and the residuals e with the robust loss, starting from the
// least-squares fit, and sets the reweighted cell weights `se_weight` and
// their normal equations, which the standard errors use. Returns false with
// result->message set when the fit fails.
bool RefitRobust(const CpdOptions& options, const internal::CompressedCells& cells,
                 Eigen::VectorXd* a, Eigen::VectorXd* b, Eigen::VectorXd* e,
                 std::vector<double>* se_weight, std::optional<NormalEquations>* robust_normal,
                 CpdResult* result) {
  const double scale = RobustScale(options, cells, *e);
  if (!(scale > 0.0)) {
    AppendNote("the least-squares fit is exact, so the robust loss changes nothing",
               &result->message);
    return true;
  }
  std::string note;
  if (!internal::SolveRobustCpd(cells, options.loss, scale, a, b, &note)) {
    result->message = note;
    return false;
  }
  AppendNote(note, &result->message);
  result->robust_scale_used = scale;
  *e = Residuals(cells, *a, *b);
  const int num_cells = static_cast<int>(cells.region.size());
  for (int k = 0; k < num_cells; ++k) {
    const double w = cells.weight[k];
    (*se_weight)[k] = w * internal::RobustWeightFactor(options.loss, scale, w * (*e)[k] * (*e)[k]);
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

bool CpdOptions::IsValid(std::string* error) const {
  if (loss != CpdLoss::kLeastSquares && loss != CpdLoss::kHuber && loss != CpdLoss::kCauchy) {
    *error = "loss is " + std::to_string(static_cast<int>(loss)) +
             "; it must be least-squares, huber or cauchy";
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
  if (options.loss != CpdLoss::kLeastSquares &&
      !RefitRobust(options, cells, &a, &b, &e, &se_weight, &robust_normal, &result)) {
    return result;
  }
  result.sigma2 = ResidualVariance(se_weight, e, result.degrees_of_freedom);

  const Eigen::VectorXd reference = ReferenceWeights(options, present.region_of, &result.message);
  const double shift = reference.dot(a);
  a.array() -= shift;
  b.array() += shift;

  Eigen::VectorXd se;
  Eigen::VectorXd se_robust;
  StandardErrors(robust_normal ? *robust_normal : normal, cells, se_weight, e, reference,
                 result.sigma2, options.compute_standard_errors,
                 options.compute_robust_standard_errors, &se, &se_robust);
  StoreFit(data, present, cells, a, b, se, se_robust, &result);
  result.identified = true;
  return result;
}

}  // namespace paritas
