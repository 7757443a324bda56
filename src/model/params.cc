// Parameter regions: the usual bounds and the admissible (forecastable) region.
#include "plimsoll/model/params.h"

#include <cmath>
#include <sstream>
#include <vector>

#include <Eigen/Eigenvalues>

#include "model/state_space.h"

namespace plimsoll::model {
namespace {

std::string Num(double v) {
  std::ostringstream os;
  os.precision(10);
  os << v;
  return os.str();
}

Status CheckUsual(const ModelSpec& spec, const Params& p) {
  if (!(p.alpha > 0.0 && p.alpha < 1.0)) return Status::OutOfRange("alpha " + Num(p.alpha) + " is not in (0, 1)");
  if (spec.has_trend() && !(p.beta > 0.0 && p.beta < p.alpha)) {
    return Status::OutOfRange("beta " + Num(p.beta) + " is not in (0, alpha = " + Num(p.alpha) + ")");
  }
  if (spec.has_season() && !(p.gamma > 0.0 && p.gamma < 1.0 - p.alpha)) {
    return Status::OutOfRange("gamma " + Num(p.gamma) + " is not in (0, 1 - alpha = " + Num(1.0 - p.alpha) + ")");
  }
  if (spec.damped() && !(p.phi >= 0.8 && p.phi <= 0.98)) {
    return Status::OutOfRange("phi " + Num(p.phi) + " is not in [0.8, 0.98]");
  }
  return Status::Ok();
}

// Eigenvalues of D = F - g w' inside the unit circle (2008 book, ch. 10). Seasonal forms carry
// one unit eigenvalue (adding c to the level and -c to every seasonal leaves forecasts alone);
// it does not affect forecastability and is removed before the test.
Status CheckAdmissible(const ModelSpec& spec, const Params& p) {
  for (double v : {p.alpha, p.beta, p.gamma, p.phi}) {
    if (!std::isfinite(v)) return Status::OutOfRange("parameters must be finite");
  }
  if (spec.damped() && !(p.phi > 0.0 && p.phi <= 1.0)) {
    return Status::OutOfRange("phi " + Num(p.phi) + " is not in (0, 1]");
  }
  internal::StateSpace ss = internal::BuildStateSpace(spec, p);
  Eigen::MatrixXd d = ss.F - ss.g * ss.w.transpose();
  Eigen::EigenSolver<Eigen::MatrixXd> solver(d, /*computeEigenvectors=*/false);
  if (solver.info() != Eigen::Success) return Status::NumericFailure("eigenvalues of D did not converge");
  std::vector<std::complex<double>> eig(solver.eigenvalues().begin(), solver.eigenvalues().end());
  if (spec.has_season()) {
    size_t nearest = 0;
    for (size_t i = 1; i < eig.size(); ++i) {
      if (std::abs(eig[i] - 1.0) < std::abs(eig[nearest] - 1.0)) nearest = i;
    }
    if (std::abs(eig[nearest] - 1.0) < 1e-6) eig.erase(eig.begin() + static_cast<long>(nearest));
  }
  for (const auto& lambda : eig) {
    if (!(std::abs(lambda) < 1.0)) {
      return Status::OutOfRange("alpha " + Num(p.alpha) + ", beta " + Num(p.beta) + ", gamma " + Num(p.gamma) +
                                ", phi " + Num(p.phi) + " are not forecastable: D = F - g w' has eigenvalue " +
                                Num(lambda.real()) + (lambda.imag() >= 0 ? "+" : "") + Num(lambda.imag()) +
                                "i with modulus " + Num(std::abs(lambda)) + " >= 1");
    }
  }
  return Status::Ok();
}

}  // namespace

Status CheckParams(const ModelSpec& spec, const Params& params, ParamRegion region) {
  if (region == ParamRegion::kUsual) return CheckUsual(spec, params);
  return CheckAdmissible(spec, params);
}

}  // namespace plimsoll::model
