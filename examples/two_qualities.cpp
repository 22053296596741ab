// rowfold example: one soft sensor state for two lab qualities (MultiResponse).
//
// INVENTED SCENARIO, SIMULATED DATA. The unit, its numbers and the "true" models below are made
// up for this example; they describe no real plant. A seeded std::mt19937_64 makes every run
// print the same report.
//
// Story: a stripper column has two lab-measured qualities, the bottoms' light-ends content and
// the overhead's heavy-ends content. Both are predicted from the same three online
// measurements (steam flow, feed temperature, top pressure), so one MultiResponse state serves
// both: one factor of the inputs, one right-hand side per quality. The fit forgets
// (lambda = 0.99, memory ~100 samples) because the unit drifts, and the windup guard keeps the
// state healthy through a 5000-sample shutdown during which the inputs do not move. After the
// restart the steam gain of the bottoms quality has changed (a fouled reboiler): the fit
// follows within a few memory lengths.
//
// The program exits non-zero when a sanity check fails, so it doubles as a smoke test.

#include <cmath>
#include <cstdio>
#include <random>

#include <Eigen/Core>

#include "rowfold/rowfold.hpp"

namespace {

using Fit = rowfold::MultiResponse<rowfold::GivensQr<float, 3>, 2>;  // K = 3 inputs, M = 2 qualities

// "True" models of the invented unit (per quality: intercept, then steam, feed T, top pressure).
double gainSteamBottoms = -0.80;
double quality(int j, const Eigen::Vector3d& x) {
  if (j == 0) return 4.0 + gainSteamBottoms * x(0) + 0.02 * x(1) + 0.5 * x(2);
  return 1.5 + 0.30 * x(0) - 0.01 * x(1) + 0.9 * x(2);
}

bool report(const Fit& fit, const char* when, double tolerance) {
  const double truth[2][3] = {{gainSteamBottoms, 0.02, 0.5}, {0.30, -0.01, 0.9}};
  const char* name[2] = {"bottoms light ends", "overhead heavy ends"};
  bool ok = true;
  std::printf("%s (%llu samples, held %llu, floor rows %llu)\n", when,
              static_cast<unsigned long long>(fit.count()),
              static_cast<unsigned long long>(fit.guardCounters().heldForgetting),
              static_cast<unsigned long long>(fit.guardCounters().floorRows));
  for (Eigen::Index j = 0; j < 2; ++j) {
    const auto s = fit.response(j).summarize(0.95f);
    std::printf("  %-20s steam %7.3f +- %.3f  feed T %7.4f  top p %6.3f  R2 %.3f  flags:", name[j],
                double(s.coefficients(0)), double(s.standardErrors(0)), double(s.coefficients(1)),
                double(s.coefficients(2)), double(s.rSquared));
    for (auto f : rowfold::kAllFlags)
      if (s.flags.has(f)) std::printf(" %s", rowfold::nameOf(f));
    std::printf("\n");
    for (int c = 0; c < 3; ++c)
      if (!(std::abs(double(s.coefficients(c)) - truth[j][c]) <= tolerance * (0.05 + std::abs(truth[j][c])))) ok = false;
  }
  return ok;
}

}  // namespace

int main() {
  rowfold::GivensQrOptions options;
  options.forgetting = 0.99;  // the windup guard is on by default with forgetting
  Fit fit(options);
  if (fit.status() != rowfold::Status::ok) return 1;

  std::mt19937_64 rng(2026);
  std::normal_distribution<double> n01(0.0, 1.0);
  Eigen::Vector3d x(10.0, 120.0, 1.8);
  const auto sample = [&](bool moving) {
    if (moving) x = Eigen::Vector3d(10.0 + n01(rng), 120.0 + 5.0 * n01(rng), 1.8 + 0.1 * n01(rng));
    const Eigen::Vector2d y(quality(0, x) + 0.02 * n01(rng), quality(1, x) + 0.02 * n01(rng));
    return fit.add(x.cast<float>(), y.cast<float>()) == rowfold::Status::ok;
  };

  bool ok = true;
  for (int i = 0; i < 1000; ++i) ok = sample(true) && ok;
  ok = report(fit, "after 1000 samples of normal operation", 0.10) && ok;
  x = Eigen::Vector3d(10.0, 120.0, 1.8);  // shutdown: the inputs rest at the operating point
  for (int i = 0; i < 5000; ++i) ok = sample(false) && ok;
  ok = report(fit, "after a 5000-sample shutdown (inputs still)", 0.10) && ok;
  gainSteamBottoms = -0.60;  // restart with a fouled reboiler
  for (int i = 0; i < 400; ++i) ok = sample(true) && ok;
  ok = report(fit, "400 samples after the restart (steam gain of the bottoms now -0.60)", 0.10) && ok;
  std::printf("%s\n", ok ? "all checks passed" : "CHECK FAILED");
  return ok ? 0 : 1;
}
