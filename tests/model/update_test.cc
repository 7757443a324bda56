#include <catch2/catch.hpp>

#include <bit>
#include <cmath>
#include <limits>
#include <vector>

#include "model/update_kernels.h"
#include "plimsoll/model/forecast.h"
#include "plimsoll/model/state.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

Params TestParams() { return Params{0.3, 0.05, 0.1, 0.9}; }

State TestState(const ModelSpec& spec) {
  std::vector<double> season;
  for (int k = 0; k < (spec.has_season() ? spec.period : 0); ++k) {
    const double wave = 0.1 * std::sin(0.7 * k);
    season.push_back(spec.season == SeasonType::kMultiplicative ? 1.0 + wave : 10.0 * wave);
  }
  return MakeState(100.0, spec.multiplicative_trend() ? 1.01 : 0.5, season, 1e-4);
}

TEST_CASE("every form runs with finite forecasts", "[model]") {
  for (int m : {1, 4, 12}) {
    for (const ModelSpec& spec : AllForms(m)) {
      INFO(spec.Notation() << " m=" << m);
      UpdateFn fn = SelectUpdate(spec);
      REQUIRE(fn != nullptr);
      State st = TestState(spec);
      for (int t = 0; t < 200; ++t) {
        const double y = 100.0 + 5.0 * std::sin(0.5 * t) + 0.3 * t;
        StepResult r = fn(TestParams(), st, y);
        REQUIRE(std::isfinite(r.mu));
        CHECK(r.error == y - r.mu);
        if (spec.error == ErrorType::kAdditive) {
          CHECK(r.innovation == r.error);
        } else {
          CHECK(r.innovation == r.error / r.mu);
        }
      }
      CHECK(st.steps == 200);
    }
  }
}

TEST_CASE("one step of ETS(M,Ad,M) follows the published equations", "[model]") {
  // Hyndman, Koehler, Ord & Snyder (2008), ch. 2, Table 2.3, M error / Ad trend / M season:
  // mu = (l + phi b) s; l' = (l + phi b)(1 + alpha eps); b' = phi b + beta (l + phi b) eps;
  // s' = s (1 + gamma eps), eps = (y - mu) / mu.
  const ModelSpec spec = *ParseModelSpec("MAdM", 3);
  const Params p{0.3, 0.05, 0.1, 0.9};
  State st = MakeState(50.0, 2.0, std::vector<double>{1.2, 0.9, 0.9});
  const double y = 60.0;
  const double lp = 50.0 + 0.9 * 2.0;
  const double mu = lp * 1.2;
  const double eps = (y - mu) / mu;
  StepResult r = Update(spec, p, st, y);
  CHECK(r.mu == Approx(mu).epsilon(1e-14));
  CHECK(r.innovation == Approx(eps).epsilon(1e-12));
  CHECK(st.level == Approx(lp * (1 + 0.3 * eps)).epsilon(1e-14));
  CHECK(st.trend == Approx(0.9 * 2.0 + 0.05 * lp * eps).epsilon(1e-13));
  CHECK(st.season[0] == Approx(1.2 * (1 + 0.1 * eps)).epsilon(1e-14));
  CHECK(st.head == 1);
}

TEST_CASE("one step of ETS(A,Md,N) follows the published equations", "[model]") {
  // 2008 book, Table 2.3, A error / Md trend / N season: mu = l b^phi; l' = l b^phi + alpha e;
  // b' = b^phi + beta e / l.
  const ModelSpec spec = *ParseModelSpec("AMdN", 1);
  const Params p{0.3, 0.05, 0, 0.9};
  State st = MakeState(50.0, 1.02, {});
  StepResult r = Update(spec, p, st, 55.0);
  const double bphi = std::pow(1.02, 0.9);
  const double e = 55.0 - 50.0 * bphi;
  CHECK(r.mu == Approx(50.0 * bphi).epsilon(1e-14));
  CHECK(st.level == Approx(50.0 * bphi + 0.3 * e).epsilon(1e-14));
  CHECK(st.trend == Approx(bphi + 0.05 * e / 50.0).epsilon(1e-14));
}

TEST_CASE("A and M error forms share state updates", "[model]") {
  for (const ModelSpec& a_spec : AllForms(6)) {
    if (a_spec.error != ErrorType::kAdditive) continue;
    ModelSpec m_spec = a_spec;
    m_spec.error = ErrorType::kMultiplicative;
    State a = TestState(a_spec), m = TestState(m_spec);
    for (int t = 0; t < 50; ++t) {
      const double y = 100.0 + 3.0 * std::cos(0.9 * t);
      StepResult ra = Update(a_spec, TestParams(), a, y);
      StepResult rm = Update(m_spec, TestParams(), m, y);
      CHECK(ra.mu == rm.mu);
    }
    CHECK(a == m);
  }
}

TEST_CASE("gap steps advance by the prediction alone", "[model]") {
  for (const ModelSpec& spec : AllForms(5)) {
    INFO(spec.Notation());
    const Params p = TestParams();
    State st = TestState(spec);
    Update(spec, p, st, 101.0);
    const State before = st;
    // After k gap steps the one-step forecast equals the (k+1)-step forecast made before them.
    const double want3 = PointForecast(spec, p, before, 4);
    for (int k = 0; k < 3; ++k) {
      StepResult r = Update(spec, p, st, kNaN);
      CHECK(r.mu == Approx(PointForecast(spec, p, before, k + 1)).epsilon(1e-12));
      CHECK(std::isnan(r.error));
      CHECK(std::isnan(r.innovation));
    }
    CHECK(PointForecast(spec, p, st, 1) == Approx(want3).epsilon(1e-12));
    CHECK(st.steps == before.steps + 3);
  }
}

TEST_CASE("an update writes one ring slot and advances the head modulo m", "[model]") {
  const ModelSpec spec = *ParseModelSpec("AAdA", 168);
  State st = TestState(spec);
  for (int t = 0; t < 400; ++t) {
    const State before = st;
    Update(spec, TestParams(), st, 90.0 + (t % 7));
    CHECK(st.head == (before.head + 1) % 168);
    int changed = 0;
    for (size_t k = 0; k < st.season.size(); ++k) {
      if (std::bit_cast<uint64_t>(st.season[k]) != std::bit_cast<uint64_t>(before.season[k])) {
        ++changed;
        CHECK(k == before.head);
      }
    }
    CHECK(changed <= 1);
  }
}

TEST_CASE("the banded step equals forecast, band and update done one after the other", "[model]") {
  // Every form, every policy, values inside and outside the band: mu, bounds, the flag and the
  // updated state must be bit-identical to PointForecast + OneStepBand + UpdateFn.
  const auto same = [](double a, double b) { return std::bit_cast<uint64_t>(a) == std::bit_cast<uint64_t>(b); };
  for (const ModelSpec& spec : AllForms(7)) {
    for (BandPolicy policy : {BandPolicy::kUpdate, BandPolicy::kClip, BandPolicy::kSkip}) {
      INFO(spec.Notation() << " policy " << static_cast<int>(policy));
      const Params p = TestParams();
      const double sigma = std::sqrt(spec.error == ErrorType::kAdditive ? 4.0 : 1e-3);
      const BandRule rule{TwoSidedZ(99.0), std::sqrt(sigma * sigma), policy};
      State banded = TestState(spec);
      State reference = banded;
      const BandedUpdateFn fn = SelectBandedUpdate(spec);
      const UpdateFn update = SelectUpdate(spec);
      int flagged = 0;
      for (int t = 0; t < 300; ++t) {
        const double y = 100.0 + 5.0 * std::sin(0.5 * t) + (t % 37 == 5 ? 60.0 : 0.0) - (t % 41 == 9 ? 50.0 : 0.0);
        const double mu = PointForecast(spec, p, reference, 1);
        if (!std::isfinite(mu) || (spec.needs_positive_data() && mu <= 0.0)) {
          // Some forms drift out of their region on this data: the step must refuse, untouched.
          CHECK_FALSE(fn(p, banded, y, rule).valid);
          CHECK(banded == reference);
          break;
        }
        const Band band = OneStepBand(spec, mu, sigma * sigma, rule.z);
        const bool out = y < band.lower || y > band.upper;
        double y_state = y;
        if (out && policy == BandPolicy::kClip) y_state = y < band.lower ? band.lower : band.upper;
        if (out && policy == BandPolicy::kSkip) y_state = kNaN;
        update(p, reference, y_state);
        const BandedStep r = fn(p, banded, y, rule);
        REQUIRE(r.valid);
        CHECK(same(r.mu, mu));
        CHECK(same(r.lower, band.lower));
        CHECK(same(r.upper, band.upper));
        CHECK(r.flagged == out);
        REQUIRE(banded == reference);
        flagged += out ? 1 : 0;
      }
      CHECK(flagged > 0);  // the spikes must have been judged outside the band
    }
  }
}

TEST_CASE("the banded step refuses a non-positive forecast and leaves the state alone", "[model]") {
  const ModelSpec spec = *ParseModelSpec("MNN", 1);
  State st = MakeState(-5.0, 0.0, {}, 1e-3);
  const State before = st;
  const BandedStep r = SelectBandedUpdate(spec)(TestParams(), st, 10.0, BandRule{2.0, 0.03, BandPolicy::kUpdate});
  CHECK_FALSE(r.valid);
  CHECK(st == before);
  const ModelSpec additive = *ParseModelSpec("ANN", 1);
  CHECK(SelectBandedUpdate(additive)(TestParams(), st, 10.0, BandRule{2.0, 0.03, BandPolicy::kUpdate}).valid);
}

TEST_CASE("point forecasts take the seasonal value for their own step", "[model]") {
  const ModelSpec spec = *ParseModelSpec("AAA", 4);
  State st = MakeState(10.0, 1.0, std::vector<double>{1, 2, 3, 4});
  Update(spec, TestParams(), st, kNaN);  // head moves to 1
  CHECK(SeasonChronological(st) == std::vector<double>{2, 3, 4, 1});
  // level 11, trend 1: h-step = 11 + h + s.
  CHECK(PointForecast(spec, TestParams(), st, 1) == Approx(11 + 1 + 2));
  CHECK(PointForecast(spec, TestParams(), st, 4) == Approx(11 + 4 + 1));
  CHECK(PointForecast(spec, TestParams(), st, 5) == Approx(11 + 5 + 2));
}

TEST_CASE("state encoding round-trips bit-exactly", "[model]") {
  State st = MakeState(-0.0, 1.0 / 3.0, std::vector<double>{1e-300, -2.5, std::nextafter(1.0, 2.0)}, 0.125);
  st.head = 2;
  st.steps = (int64_t{1} << 40) + 7;
  auto back = DecodeState(EncodeState(st));
  REQUIRE(back.ok());
  CHECK(std::bit_cast<uint64_t>(back->level) == std::bit_cast<uint64_t>(-0.0));
  CHECK(*back == st);
  CHECK(EncodeState(*back) == EncodeState(st));
  auto plain = DecodeState(EncodeState(MakeState(5.0, 0.0, {})));
  REQUIRE(plain.ok());
  CHECK(plain->season.empty());
}

TEST_CASE("corrupt state blobs are refused with Corruption", "[model]") {
  State st = MakeState(1.0, 2.0, std::vector<double>{1, 2, 3});
  const std::string good = EncodeState(st);
  auto expect = [](std::string bytes, const char* needle) {
    auto r = DecodeState(bytes);
    REQUIRE_FALSE(r.ok());
    CHECK(r.status().code() == StatusCode::kCorruption);
    INFO(r.status().message());
    CHECK(r.status().message().find(needle) != std::string::npos);
  };
  expect(good.substr(0, 10), "shorter");
  expect(good.substr(0, good.size() - 1), "needs");
  expect(good + "x", "needs");
  std::string magic = good;
  magic[0] = 'X';
  expect(magic, "PLST");
  std::string version = good;
  version[4] = 9;
  expect(version, "version 9");
  std::string head = good;
  head[9] = 3;
  expect(head, "head 3");
}

}  // namespace
}  // namespace plimsoll::model
