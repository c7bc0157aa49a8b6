// Robust CPD through Ceres Solver: one scalar residual block per cell with a
// shared robust loss. The normal equations are as sparse as the survey, so
// sparse Cholesky (SuiteSparse) is the fastest linear solver here, about four
// times DENSE_SCHUR on 1,000 regions x 50 items; without SuiteSparse the
// larger block (an independent set: every residual touches one region and
// one item) is eliminated by DENSE_SCHUR, as the least-squares solver does.
#include "elementary/robust_cpd.h"

#include <ceres/ceres.h>

#include <cmath>
#include <memory>
#include <vector>

namespace paritas::internal {
namespace {

// ln p_k - a_r - b_i scaled by sqrt(w_k); the Jacobian is constant.
class CellResidual final : public ceres::SizedCostFunction<1, 1, 1> {
 public:
  CellResidual(double log_price, double sqrt_weight)
      : log_price_(log_price), sqrt_weight_(sqrt_weight) {}

  bool Evaluate(double const* const* parameters, double* residuals,
                double** jacobians) const override {
    residuals[0] = sqrt_weight_ * (log_price_ - parameters[0][0] - parameters[1][0]);
    if (jacobians != nullptr) {
      if (jacobians[0] != nullptr) jacobians[0][0] = -sqrt_weight_;
      if (jacobians[1] != nullptr) jacobians[1][0] = -sqrt_weight_;
    }
    return true;
  }

 private:
  double log_price_;
  double sqrt_weight_;
};

}  // namespace

double RobustWeightFactor(CpdLoss loss, double scale, double squared_residual) {
  // Derivatives of Ceres' HuberLoss and CauchyLoss, rho(s) with s = r^2.
  switch (loss) {
    case CpdLoss::kHuber:
      return squared_residual <= scale * scale ? 1.0 : scale / std::sqrt(squared_residual);
    case CpdLoss::kCauchy:
      return 1.0 / (1.0 + squared_residual / (scale * scale));
    case CpdLoss::kLeastSquares:
      break;
  }
  return 1.0;
}

bool SolveRobustCpd(const CompressedCells& cells, CpdLoss loss, double scale,
                    Eigen::VectorXd* region_effect, Eigen::VectorXd* item_effect,
                    std::string* message) {
  const int num_regions = cells.num_regions;
  const int num_items = cells.num_items;
  std::vector<double> a(region_effect->data(), region_effect->data() + num_regions);
  std::vector<double> b(item_effect->data(), item_effect->data() + num_items);

  std::unique_ptr<ceres::LossFunction> loss_function;
  if (loss == CpdLoss::kCauchy) {
    loss_function = std::make_unique<ceres::CauchyLoss>(scale);
  } else {
    loss_function = std::make_unique<ceres::HuberLoss>(scale);
  }

  ceres::Problem::Options problem_options;
  // One loss object serves every cell.
  problem_options.loss_function_ownership = ceres::DO_NOT_TAKE_OWNERSHIP;
  ceres::Problem problem(problem_options);
  for (size_t k = 0; k < cells.region.size(); ++k) {
    problem.AddResidualBlock(new CellResidual(cells.log_price[k], std::sqrt(cells.weight[k])),
                             loss_function.get(), &a[cells.region[k]], &b[cells.item[k]]);
  }

  // Same gauge as the least-squares solver: the first effect of the kept
  // (smaller) block stays at its start value.
  const bool eliminate_items = num_regions <= num_items;
  problem.SetParameterBlockConstant(eliminate_items ? &a[0] : &b[0]);

  ceres::Solver::Options options;
  if (ceres::IsSparseLinearAlgebraLibraryTypeAvailable(ceres::SUITE_SPARSE)) {
    options.linear_solver_type = ceres::SPARSE_NORMAL_CHOLESKY;
    options.sparse_linear_algebra_library_type = ceres::SUITE_SPARSE;
  } else {
    auto ordering = std::make_shared<ceres::ParameterBlockOrdering>();
    for (double& effect : b) ordering->AddElementToGroup(&effect, eliminate_items ? 0 : 1);
    for (double& effect : a) ordering->AddElementToGroup(&effect, eliminate_items ? 1 : 0);
    options.linear_solver_type = ceres::DENSE_SCHUR;
    options.linear_solver_ordering = ordering;
  }
  options.num_threads = 1;  // deterministic
  options.max_num_iterations = 200;
  options.function_tolerance = 1e-14;
  options.gradient_tolerance = 1e-14;
  options.parameter_tolerance = 1e-12;
  options.logging_type = ceres::SILENT;
  options.minimizer_progress_to_stdout = false;

  ceres::Solver::Summary summary;
  ceres::Solve(options, &problem, &summary);
  if (!summary.IsSolutionUsable()) {
    *message = "robust CPD: Ceres Solver found no usable solution: " + summary.message;
    return false;
  }
  if (summary.termination_type == ceres::NO_CONVERGENCE) {
    *message = "robust CPD: Ceres Solver stopped after " +
               std::to_string(summary.iterations.size()) +
               " iterations without meeting its tolerances";
  }
  *region_effect = Eigen::Map<const Eigen::VectorXd>(a.data(), num_regions);
  *item_effect = Eigen::Map<const Eigen::VectorXd>(b.data(), num_items);
  return true;
}

}  // namespace paritas::internal
