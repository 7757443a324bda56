// Published formulas and worked examples. Sources beside each check.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <vector>

#include <Eigen/Dense>

#include "plimsoll/model/forecast.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/params.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

State StateFor(const ModelSpec& spec, double level, double trend, double sigma2) {
  std::vector<double> season(spec.has_season() ? static_cast<size_t>(spec.period) : 0, 0.0);
  return MakeState(level, trend, season, sigma2);
}

// Hyndman, Koehler, Ord & Snyder (2008), "Forecasting with Exponential Smoothing: The State
// Space Approach", Springer, ch. 6, class 1 variance expressions, e.g. (A,N,N):
// v_h = s2 [1 + alpha^2 (h-1)]; evaluated [computed] in shared REFERENCES.md at alpha = 0.5,
// beta = 0.1, gamma = 0.2, phi = 0.9, m = 4, sigma^2 = 1.
TEST_CASE("class 1 variances match the published expressions", "[model][reference]") {
  const int hs[] = {1, 2, 3, 4, 5, 6, 8, 12};
  struct Row {
    const char* form;
    double values[8];
    double tol;  // absolute: the table prints 2 or 7-8 significant digits
  };
  const Row rows[] = {
      {"ANN", {1, 1.25, 1.5, 1.75, 2.0, 2.25, 2.75, 3.75}, 1e-12},
      {"AAN", {1, 1.36, 1.85, 2.49, 3.30, 4.30, 6.95, 15.41}, 1e-12},
      {"AAdN", {1, 1.3481, 1.798341, 2.3517282, 3.0070347, 3.7614294, 5.5509598, 10.110325}, 6e-7},
      {"ANA", {1, 1.25, 1.5, 1.75, 2.24, 2.49, 2.99, 4.23}, 1e-12},
      {"AAA", {1, 1.36, 1.85, 2.49, 3.70, 4.70, 7.35, 16.37}, 1e-12},
      {"AAdA", {1, 1.3481, 1.798341, 2.3517282, 3.3708387, 4.1252334, 5.9147638, 10.919161}, 6e-7},
  };
  const Params p{0.5, 0.1, 0.2, 0.9};
  for (const Row& row : rows) {
    const ModelSpec spec = *ParseModelSpec(row.form, 4);
    auto v = AnalyticVariances(spec, p, StateFor(spec, 100, 1, 1.0), 12);
    REQUIRE(v.ok());
    for (int i = 0; i < 8; ++i) {
      INFO(row.form << " h=" << hs[i]);
      CHECK(std::abs((*v)[hs[i] - 1] - row.values[i]) <= row.tol);
    }
  }
}

// Closed forms, same book ch. 6: (A,A,N) s2 [1 + (h-1){alpha^2 + alpha beta h + beta^2 h(2h-1)/6}];
// (A,N,A) s2 [1 + alpha^2 (h-1) + gamma k (2 alpha + gamma)], k = floor((h-1)/m);
// (A,A,A) = (A,A,N) + s2 gamma k {2 alpha + gamma + beta m (k+1)}. Checked at other parameters
// and long horizons.
TEST_CASE("class 1 variances follow the closed forms at long horizons", "[model][reference]") {
  const Params p{0.27, 0.03, 0.11, 1.0};
  const int m = 12;
  const double s2 = 2.5;
  auto aan = AnalyticVariances(*ParseModelSpec("AAN", 1), p, StateFor(*ParseModelSpec("AAN", 1), 10, 1, s2), 60);
  auto ana = AnalyticVariances(*ParseModelSpec("ANA", m), p, StateFor(*ParseModelSpec("ANA", m), 10, 0, s2), 60);
  auto aaa = AnalyticVariances(*ParseModelSpec("AAA", m), p, StateFor(*ParseModelSpec("AAA", m), 10, 1, s2), 60);
  REQUIRE((aan.ok() && ana.ok() && aaa.ok()));
  for (int h = 1; h <= 60; ++h) {
    const double k = std::floor((h - 1.0) / m);
    const double a = p.alpha, b = p.beta, g = p.gamma;
    const double v_aan = s2 * (1 + (h - 1) * (a * a + a * b * h + b * b * h * (2.0 * h - 1) / 6));
    const double v_ana = s2 * (1 + a * a * (h - 1) + g * k * (2 * a + g));
    const double v_aaa = v_aan + s2 * g * k * (2 * a + g + b * m * (k + 1));
    INFO("h=" << h);
    CHECK((*aan)[h - 1] == Approx(v_aan).epsilon(1e-12));
    CHECK((*ana)[h - 1] == Approx(v_ana).epsilon(1e-12));
    CHECK((*aaa)[h - 1] == Approx(v_aaa).epsilon(1e-12));
  }
}

// Hyndman, Koehler, Ord & Snyder (2005), J. Forecasting 24, 17-37, class 2 recursion; for (M,N,N)
// v_h = l^2 [(1 + alpha^2 s2)^{h-1} (1 + s2) - 1]. Values [computed] in REFERENCES.md,
// s2 = 0.01, alpha = 0.5, beta = 0.1.
TEST_CASE("class 2 variances match the published recursion", "[model][reference]") {
  const Params p{0.5, 0.1, 0.2, 0.9};
  const ModelSpec mnn = *ParseModelSpec("MNN", 1);
  auto v = AnalyticVariances(mnn, p, StateFor(mnn, 100, 0, 0.01), 8);
  REQUIRE(v.ok());
  const double want[] = {100, 125.25, 150.56312, 175.93953, 201.37938, 226.88283, 252.45004, 278.08116};
  for (int h = 1; h <= 8; ++h) {
    INFO("MNN h=" << h);
    CHECK(std::abs((*v)[h - 1] - want[h - 1]) < 6e-6);
    CHECK((*v)[h - 1] == Approx(1e4 * (std::pow(1 + 0.25 * 0.01, h - 1) * 1.01 - 1)).epsilon(1e-12));
  }
  const ModelSpec man = *ParseModelSpec("MAN", 1);
  const State st = StateFor(man, 100, 2, 0.01);
  auto vm = AnalyticVariances(man, p, st, 4);
  REQUIRE(vm.ok());
  const double mean[] = {102, 104, 106, 108};
  const double var[] = {104.04, 145.98894, 203.31256, 278.78673};
  for (int h = 1; h <= 4; ++h) {
    INFO("MAN h=" << h);
    CHECK(PointForecast(man, p, st, h) == Approx(mean[h - 1]).epsilon(1e-14));
    CHECK(std::abs((*vm)[h - 1] - var[h - 1]) < 6e-6);
  }
}

// Admissible region closed forms, Hyndman, Koehler, Ord & Snyder (2008), ch. 10:
// (A,N,N) 0 < alpha < 2; (A,A,N) 0 < alpha < 2 and 0 < beta < 4 - 2 alpha.
TEST_CASE("admissible region matches the published closed forms", "[model][reference]") {
  const ModelSpec ann = *ParseModelSpec("ANN", 1);
  const ModelSpec aan = *ParseModelSpec("AAN", 1);
  for (double a = -0.45; a < 2.5; a += 0.1) {
    INFO("alpha=" << a);
    CHECK(CheckParams(ann, {a, 0, 0, 1}, ParamRegion::kAdmissible).ok() == (a > 0 && a < 2));
    for (double b = -0.45; b < 4.5; b += 0.1) {
      INFO("beta=" << b);
      const bool want = a > 0 && a < 2 && b > 0 && b < 4 - 2 * a;
      CHECK(CheckParams(aan, {a, b, 0, 1}, ParamRegion::kAdmissible).ok() == want);
    }
  }
}

// (A,Ad,A): roots of lambda^{m+1} + (alpha + phi beta - phi) lambda^m + (alpha + phi beta -
// alpha phi)(lambda^{m-1} + ... + lambda^2) + (alpha + phi beta - alpha phi + gamma - 1) lambda
// + phi (1 - alpha - gamma) inside the unit circle (2008 book, ch. 10). Roots here from the
// companion matrix of that polynomial, independent of our D = F - g w' construction.
TEST_CASE("admissible region of ETS(A,Ad,A) matches its characteristic polynomial", "[model][reference]") {
  const int m = 4;
  const ModelSpec spec = *ParseModelSpec("AAdA", m);
  int admissible = 0, refused = 0;
  for (double a : {0.1, 0.5, 0.9, 1.3, 1.7}) {
    for (double b : {0.05, 0.3, 0.8, 1.5}) {
      for (double g : {0.05, 0.3, 0.7, 1.1}) {
        for (double phi : {0.8, 0.95}) {
          // Coefficients of lambda^{m+1} .. lambda^0.
          std::vector<double> c(m + 2, 0.0);
          c[0] = 1;
          c[1] = a + phi * b - phi;
          for (int k = 2; k <= m - 1; ++k) c[k] = a + phi * b - a * phi;
          c[m] = a + phi * b - a * phi + g - 1;
          c[m + 1] = phi * (1 - a - g);
          Eigen::MatrixXd comp = Eigen::MatrixXd::Zero(m + 1, m + 1);
          for (int j = 0; j <= m; ++j) comp(0, j) = -c[j + 1];
          for (int i = 1; i <= m; ++i) comp(i, i - 1) = 1;
          Eigen::EigenSolver<Eigen::MatrixXd> es(comp, false);
          bool inside = true;
          for (int i = 0; i <= m; ++i) inside = inside && std::abs(es.eigenvalues()(i)) < 1;
          INFO("alpha " << a << " beta " << b << " gamma " << g << " phi " << phi);
          CHECK(CheckParams(spec, {a, b, g, phi}, ParamRegion::kAdmissible).ok() == inside);
          (inside ? admissible : refused)++;
        }
      }
    }
  }
  CHECK(admissible > 20);
  CHECK(refused > 20);
}

// NIST/SEMATECH e-Handbook of Statistical Methods, section 6.4.3: single exponential smoothing
// with the first smoothed value = y_1 is ETS(A,N,N) started at level y_1.
TEST_CASE("single smoothing reproduces the NIST worked examples", "[model][reference]") {
  const ModelSpec ann = *ParseModelSpec("ANN", 1);
  // Data from memory; smoothed values S_2..S_12 [computed]; final forecast 71.7 [pub].
  const std::vector<double> y = {71, 70, 69, 68, 64, 65, 72, 78, 75, 75, 75, 70};
  const double smoothed[] = {71, 70.9, 70.71, 70.44, 69.80, 69.32, 69.58, 70.43, 70.88, 71.29, 71.67};
  State st = MakeState(71, 0, {});
  double last_mu = 0;
  for (size_t t = 1; t < y.size(); ++t) {
    StepResult r = Update(ann, {0.1, 0, 0, 1}, st, y[t]);
    CHECK(std::abs(r.mu - smoothed[t - 1]) < 0.005 + 1e-12);
    last_mu = r.mu;
  }
  // In the handbook's convention S_12 (made before y_12 = 70) is the quoted 71.7.
  CHECK(std::abs(last_mu - 71.7) < 0.05);
  // Triple-smoothing data [pub], alpha = 0.4694: MSE 6906 [pub] over the 23 one-step errors.
  const std::vector<double> q = {362, 385, 432, 341, 382, 409, 498, 387, 473, 513, 582, 474,
                                 544, 582, 681, 557, 628, 707, 773, 592, 627, 725, 854, 661};
  auto lik = EvaluateLikelihood(ann, {0.4694, 0, 0, 1}, MakeState(362, 0, {}), std::span(q).subspan(1));
  REQUIRE(lik.ok());
  CHECK(lik->n == 23);
  CHECK(std::abs(lik->sigma2 - 6906) < 1.0);
}

}  // namespace
}  // namespace plimsoll::model
