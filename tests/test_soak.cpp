// float32 stability over a long run: an invented drifting process folded with forgetting
// lambda = 0.99 into GivensQr, NormalEquations and ForgettingRls in float and in double.
// Requirements (firmware issue): no NaN/Inf, the factor stays positive definite where it applies,
// and the float coefficients track the truth within 2x the double run's error.
// The environment variable ROWFOLD_SOAK_SAMPLES sets the length (default 1e6, the `test_soak`
// run; `test_soak_long`, label `soak`, runs the same binary with 1e8).
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"

namespace {

std::uint64_t soakSamples() {
  const char* text = std::getenv("ROWFOLD_SOAK_SAMPLES");
  const unsigned long long n = text != nullptr ? std::strtoull(text, nullptr, 10) : 0;
  return n >= 1000000 ? std::uint64_t(n) : std::uint64_t(1000000);  // at least the default run
}

using rowfold::Flag;
using rowfold::Status;

// Deterministic invented plant: three measurements around large operating points (the hard case
// for float: offset data, slowly varying, correlated), one slowly drifting gain.
struct Plant {
  std::uint64_t s = 0x9E3779B97F4A7C15ULL;
  double a1 = 0, a2 = 0;
  double uniform() {
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    return double(s >> 11) / double(1ULL << 53);
  }
  double gauss() { return (uniform() + uniform() + uniform() + uniform() - 2.0) * std::sqrt(3.0); }
  Eigen::Vector3d theta(std::uint64_t t) const {
    return Eigen::Vector3d(0.8 + 0.3 * std::sin(2e-5 * double(t)), -1.2, 0.05);
  }
  void step(std::uint64_t t, Eigen::Vector3d& x, double& y) {
    a1 = 0.95 * a1 + 0.3 * gauss();
    a2 = 0.9 * a2 + 0.5 * gauss();
    x << 50.0 + a1, 20.0 + a1 + 0.05 * a2, 200.0 + 10.0 * std::sin(1e-3 * double(t)) + gauss();
    y = 3.0 + theta(t).dot(x) + 0.05 * gauss();
  }
};

template <typename E>
E makeEstimator() {
  typename E::Options o;
  o.forgetting = 0.99;
  return E(o);
}

template <template <typename, int, int> class E>
void soak(const char* name) {
  using Ef = E<float, 3, 3>;
  using Ed = E<double, 3, 3>;
  Ef ef = makeEstimator<Ef>();
  Ed ed = makeEstimator<Ed>();
  Plant plant;
  Eigen::Vector3d x;
  double y = 0;
  double errF = 0, errD = 0;
  long checkpoints = 0;
  bool finite = true, definite = true;
  const std::uint64_t n = soakSamples();
  const std::uint64_t every = n / 200;
  for (std::uint64_t t = 0; t < n; ++t) {
    plant.step(t, x, y);
    if (ef.add(Eigen::Vector3f(x.cast<float>()), float(y)) != Status::ok) finite = false;
    if (ed.add(x, y) != Status::ok) finite = false;
    if (t > 2000 && t % every == 0) {
      const auto sf = ef.solve();
      const auto sd = ed.solve();
      const Eigen::Vector3d truth = plant.theta(t);
      finite = finite && sf.coefficients.allFinite() && std::isfinite(sf.intercept);
      definite = definite && !sf.flags.has(Flag::lost_definiteness) && !sf.flags.has(Flag::rank_deficient);
      errF += (sf.coefficients.template cast<double>() - truth).squaredNorm();
      errD += (sd.coefficients - truth).squaredNorm();
      ++checkpoints;
    }
  }
  const auto cf = ef.conditioning();
  const double rmsF = std::sqrt(errF / double(checkpoints));
  const double rmsD = std::sqrt(errD / double(checkpoints));
  MESSAGE(std::string(name) << ": " << n << " samples, rms coefficient error float " << rmsF << " vs double " << rmsD
                << ", float scaled condition " << cf.scaledCondition);
  CHECK(finite);
  CHECK(definite);
  CHECK(cf.status == Status::ok);
  CHECK(rmsF <= 2.0 * rmsD);
}

}  // namespace

TEST_CASE("float32 soak, lambda = 0.99: GivensQr") { soak<rowfold::GivensQr>("GivensQr"); }
TEST_CASE("float32 soak, lambda = 0.99: NormalEquations") { soak<rowfold::NormalEquations>("NormalEquations"); }
TEST_CASE("float32 soak, lambda = 0.99: ForgettingRls") { soak<rowfold::ForgettingRls>("ForgettingRls"); }
