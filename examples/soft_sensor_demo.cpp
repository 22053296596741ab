// rowfold demo: a soft sensor for distillate impurity, fitted one sample at a time.
//
// INVENTED SCENARIO, SIMULATED DATA. The column, its numbers and the "true" model below are made
// up for this demo; they describe no real plant. A seeded std::mt19937_64 makes every run print
// the same report (all but the timing lines at the end).
//
// Story: a distillation column's distillate impurity is measured by the lab (slow, noisy). A
// soft sensor predicts it from three online measurements: reflux flow, a tray temperature and
// the feed rate. Samples arrive one at a time and are folded into four estimators that share one
// interface. Three things happen on the way:
//   1. the tray thermocouple fails for a few samples (it reads NaN): every estimator refuses those
//      samples with Status::nonfinite_input and keeps its state untouched;
//   2. operations switch reflux to ratio control (reflux follows feed), so two inputs start moving
//      together: the later report raises Flag::collinear (VIFs above 10);
//   3. ForgettingRls runs with forgetting lambda = 0.995 (memory ~200 samples), so its statistics
//      use the effective sample size and its collinearity shows sooner and stronger.
//
// The program exits non-zero when a sanity check fails, so it doubles as a smoke test.

#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <limits>
#include <random>
#include <vector>

#include <Eigen/Core>

#include "rowfold/rowfold.hpp"

namespace {

constexpr int K = 3;
using Vec = Eigen::Matrix<double, K, 1>;

// ---- invented plant ---------------------------------------------------------------------------

constexpr const char* kInputName[K] = {"reflux flow [t/h]", "tray temp [degC]", "feed rate [t/h]"};
constexpr const char* kInputShort[K] = {"reflux", "tray T", "feed"};
// "True" model of the invented plant: impurity [mol%] = b0 + b'x + lab noise.
constexpr double kTrueIntercept = -10.5;
constexpr double kTrueSlope[K] = {-0.060, 0.150, 0.025};
constexpr double kLabNoise = 0.04;  // standard deviation of the lab analysis [mol%]

constexpr int kPhase1 = 1500;          // independent operation
constexpr int kPhase2 = 1500;          // reflux on ratio control: reflux ~ 0.42 * feed
constexpr int kSamples = kPhase1 + kPhase2;
constexpr double kRampTo = 130.0;     // feed at the end of the throughput campaign [t/h]
constexpr int kFaultStart = 700;       // tray thermocouple reads NaN for kFaultLength samples
constexpr int kFaultLength = 5;
constexpr std::uint64_t kSeed = 20260101u;

struct Sample {
  Vec x;
  double y;
};

// Slowly wandering plant signals (first-order autoregressive disturbances around set points).
std::vector<Sample> simulatePlant() {
  std::mt19937_64 rng(kSeed);
  std::normal_distribution<double> unit(0.0, 1.0);
  std::vector<Sample> out;
  out.reserve(kSamples);
  const double a = 0.95;                       // AR(1) coefficient of the disturbances
  const double g = std::sqrt(1.0 - a * a);     // keeps the stationary standard deviation at 1
  double dReflux = 0.0, dTemp = 0.0, dFeed = 0.0;
  for (int i = 0; i < kSamples; ++i) {
    dReflux = a * dReflux + g * unit(rng);
    dTemp = a * dTemp + g * unit(rng);
    dFeed = a * dFeed + g * unit(rng);
    const double ratioNoise = unit(rng);
    const double labNoise = unit(rng);
    Sample s;
    double feed, reflux;
    if (i < kPhase1) {
      feed = 100.0 + 3.0 * dFeed;
      reflux = 42.0 + 0.6 * dReflux;
    } else {
      // Throughput campaign: feed ramps from 100 to kRampTo t/h; reflux follows at a fixed ratio.
      const double ramp = (kRampTo - 100.0) * double(i - kPhase1) / double(kPhase2 - 1);
      feed = 100.0 + ramp + 1.5 * dFeed;
      reflux = 0.42 * feed + 0.15 * ratioNoise;
    }
    const double temp = 78.0 + 0.8 * dTemp;
    s.x << reflux, temp, feed;
    s.y = kTrueIntercept + kTrueSlope[0] * reflux + kTrueSlope[1] * temp + kTrueSlope[2] * feed +
          kLabNoise * labNoise;
    if (i >= kFaultStart && i < kFaultStart + kFaultLength) s.x(1) = std::numeric_limits<double>::quiet_NaN();
    out.push_back(s);
  }
  return out;
}

// ---- reporting ----------------------------------------------------------------------------------

const char* sentence(rowfold::Flag f) {
  switch (f) {
    case rowfold::Flag::none: return "no warning.";
    case rowfold::Flag::ill_conditioned:
      return "the inputs are badly conditioned: standard errors, VIFs and digit estimates carry few "
             "correct digits.";
    case rowfold::Flag::near_singular:
      return "the inputs are singular to working precision for this estimator: some coefficient may "
             "have no correct digit.";
    case rowfold::Flag::collinear:
      return "inputs move together (a VIF is above the limit of 10): the individual coefficients of "
             "those inputs are poorly determined, although predictions along the usual operating "
             "line can still be good.";
    case rowfold::Flag::rank_deficient:
      return "the data do not determine every coefficient; the dependent ones were set to zero.";
    case rowfold::Flag::too_few_samples:
      return "there are not more (effective) samples than coefficients: the statistics are not "
             "meaningful yet.";
    case rowfold::Flag::lost_definiteness:
      return "the covariance-form state P is no longer positive definite: reset the estimator or use "
             "GivensQr.";
    case rowfold::Flag::low_excitation:
      return "recent samples carried almost no new information: in some direction the estimate rests "
             "on old data.";
    case rowfold::Flag::windup_guarded:
      return "an input has stopped moving: the windup guard holds its information at a floor so the "
             "estimator cannot blow up while it is parked.";
  }
  return "unknown flag.";
}

/// Prints `text` word-wrapped at kWidth columns; the first line continues at column `column`,
/// later lines are indented by `indent`.
void printWrapped(const char* text, int column, int indent) {
  constexpr int kWidth = 96;
  const char* p = text;
  while (*p != '\0') {
    while (*p == ' ') ++p;
    const char* end = p;
    while (*end != '\0' && *end != ' ') ++end;
    const int len = static_cast<int>(end - p);
    if (column + 1 + len > kWidth && column > indent) {
      std::printf("\n%*s", indent, "");
      column = indent;
    } else {
      std::printf(" ");
      ++column;
    }
    std::printf("%.*s", len, p);
    column += len;
    p = end;
  }
  std::printf("\n");
}

void printFlags(rowfold::Flags flags) {
  if (!flags.any()) {
    std::printf("  flags: none - the fit looks numerically sound.\n");
    return;
  }
  std::printf("  flags:\n");
  for (rowfold::Flag f : rowfold::kAllFlags)
    if (flags.has(f)) {
      std::printf("    [%s]", rowfold::nameOf(f));
      printWrapped(sentence(f), 6 + static_cast<int>(std::strlen(rowfold::nameOf(f))), 6);
    }
}

/// What the demo remembers about one estimator between checkpoints.
struct Tally {
  const char* name = "";
  const char* how = "";
  double lambda = 1.0;
  std::uint64_t rejected = 0;
  rowfold::Status lastReject = rowfold::Status::ok;
  double foldSeconds = 0.0;
  std::uint64_t attempts = 0;
  double solveSeconds = 0.0;
};

int g_failures = 0;
void check(bool ok, const char* what) {
  if (!ok) {
    std::printf("  SANITY CHECK FAILED: %s\n", what);
    ++g_failures;
  }
}

template <typename Estimator>
rowfold::Flags report(const Estimator& est, const Tally& t, const Vec& now, bool expectCollinear) {
  std::printf("\n--- %s (%s), lambda = %g ---\n", t.name, t.how, t.lambda);
  const auto s = est.summarize(0.95);
  std::printf("  samples folded %llu, rejected %llu", static_cast<unsigned long long>(est.count()),
              static_cast<unsigned long long>(t.rejected));
  if (t.rejected > 0) std::printf(" (last reason: %s)", rowfold::nameOf(t.lastReject));
  std::printf(", effective samples %.1f\n", static_cast<double>(s.effectiveCount));
  if (s.status != rowfold::Status::ok) {
    std::printf("  no report: status %s\n", rowfold::nameOf(s.status));
    check(false, "summarize() returned a status other than ok");
    return s.flags;
  }
  std::printf("  %-20s %10s   %-24s %9s %8s\n", "term", "estimate", "95% confidence interval", "std.err",
              "true");
  std::printf("  %-20s %10.4f   [%9.4f, %9.4f]   %9.4f %8.3f\n", "intercept", s.intercept, s.interceptLower,
              s.interceptUpper, s.interceptStandardError, kTrueIntercept);
  for (int j = 0; j < K; ++j)
    std::printf("  %-20s %10.5f   [%9.5f, %9.5f]   %9.5f %8.3f\n", kInputName[j], s.coefficients(j), s.lower(j),
                s.upper(j), s.standardErrors(j), kTrueSlope[j]);
  std::printf("  residual standard error %.4f mol%% on %.1f degrees of freedom (true lab noise %.3f)\n",
              s.residualStandardError, s.residualDof, kLabNoise);
  std::printf("  R^2 %.4f, adjusted R^2 %.4f\n", s.rSquared, s.adjustedRSquared);
  const auto& c = s.conditioning;
  std::printf("  scaled condition estimate %.3g; VIF", c.scaledCondition);
  for (int j = 0; j < K; ++j) std::printf(" %s %.2f%s", kInputShort[j], c.vif(j), j + 1 < K ? "," : "\n");
  std::printf("  estimated correct digits:");
  for (int j = 0; j < K; ++j) std::printf(" %s %.1f,", kInputShort[j], c.digits(j));
  std::printf(" intercept %.1f\n", c.interceptDigits);
  const auto p = est.predictionInterval(now, 0.95);
  if (p.status == rowfold::Status::ok)
    std::printf("  soft-sensor reading at the latest plant state: %.3f mol%% (95%% prediction interval "
                "%.3f to %.3f)\n",
                p.value, p.predictionLower, p.predictionUpper);
  printFlags(s.flags);

  check(s.flags.has(rowfold::Flag::collinear) == expectCollinear,
        expectCollinear ? "collinear flag expected but not raised" : "unexpected collinear flag");
  check(t.rejected == static_cast<std::uint64_t>(kFaultLength), "every NaN sample must be rejected");
  check(std::abs(s.coefficients(1) - kTrueSlope[1]) < 6.0 * s.standardErrors(1),
        "tray temperature coefficient far from the invented truth");
  return s.flags;
}

template <typename Estimator>
void foldSegment(Estimator& est, Tally& t, const std::vector<Sample>& data, int from, int to) {
  const auto start = std::chrono::steady_clock::now();
  for (int i = from; i < to; ++i) {
    const rowfold::Status st = est.add(data[i].x, data[i].y);
    if (st != rowfold::Status::ok) {
      ++t.rejected;
      t.lastReject = st;
    }
  }
  const auto stop = std::chrono::steady_clock::now();
  t.foldSeconds += std::chrono::duration<double>(stop - start).count();
  t.attempts += static_cast<std::uint64_t>(to - from);
}

template <typename Estimator>
void timeSolve(const Estimator& est, Tally& t) {
  const auto start = std::chrono::steady_clock::now();
  const auto sol = est.solve();
  const auto stop = std::chrono::steady_clock::now();
  t.solveSeconds = std::chrono::duration<double>(stop - start).count();
  check(sol.status == rowfold::Status::ok, "solve() failed");
}

}  // namespace

int main() {
  std::printf("rowfold soft-sensor demo\n");
  std::printf("NOTE: the distillation column, its measurements and the model are INVENTED; all data are\n"
              "simulated (std::mt19937_64, seed %llu). They describe no real plant.\n\n",
              static_cast<unsigned long long>(kSeed));
  std::printf("Target: distillate impurity [mol%%] from the lab.\nInputs: %s, %s, %s.\n", kInputName[0],
              kInputName[1], kInputName[2]);
  std::printf("Invented truth: impurity = %.2f %+.3f*reflux %+.3f*trayT %+.3f*feed + noise(sd %.2f)\n",
              kTrueIntercept, kTrueSlope[0], kTrueSlope[1], kTrueSlope[2], kLabNoise);
  std::printf("Samples 1-%d: inputs vary independently. Samples %d-%d: the tray thermocouple reads NaN.\n",
              kPhase1, kFaultStart + 1, kFaultStart + kFaultLength);
  std::printf("Samples %d-%d: reflux on ratio control (reflux = 0.42 x feed) during a feed ramp to %.0f t/h,\n"
              "so reflux and feed move together.\n",
              kPhase1 + 1, kSamples, kRampTo);

  const std::vector<Sample> data = simulatePlant();

  rowfold::BatchQrOptions batchOptions;
  batchOptions.capacity = kSamples;
  rowfold::BatchQr<double, K> batch(batchOptions);
  rowfold::GivensQr<double, K> givens;
  rowfold::NormalEquations<double, K> normal;
  rowfold::ForgettingRlsOptions rlsOptions;
  rlsOptions.forgetting = 0.995;
  rowfold::ForgettingRls<double, K> rls(rlsOptions);

  check(batch.status() == rowfold::Status::ok && givens.status() == rowfold::Status::ok &&
            normal.status() == rowfold::Status::ok && rls.status() == rowfold::Status::ok,
        "an estimator rejected its options");

  Tally tb{"BatchQr", "stored rows, Householder QR with refinement at solve time"};
  Tally tg{"GivensQr", "triangular factor, one Givens sweep per sample"};
  Tally tn{"NormalEquations", "centered co-moments, Cholesky at solve time"};
  Tally tr{"ForgettingRls", "covariance-form recursive least squares, exact start"};
  tr.lambda = rlsOptions.forgetting;

  const int checkpoints[] = {kPhase1, kSamples};
  int done = 0;
  for (int cp : checkpoints) {
    foldSegment(batch, tb, data, done, cp);
    foldSegment(givens, tg, data, done, cp);
    foldSegment(normal, tn, data, done, cp);
    foldSegment(rls, tr, data, done, cp);
    done = cp;

    const bool collinearPhase = cp > kPhase1;
    std::printf("\n========== checkpoint after sample %d (%s) ==========\n", cp,
                collinearPhase ? "end of the ratio-control phase" : "end of independent operation");
    const Vec& now = data[static_cast<std::size_t>(cp - 1)].x;
    std::printf("latest plant state: reflux %.2f t/h, tray %.2f degC, feed %.2f t/h\n", now(0), now(1), now(2));
    report(batch, tb, now, collinearPhase);
    report(givens, tg, now, collinearPhase);
    report(normal, tn, now, collinearPhase);
    report(rls, tr, now, collinearPhase);
  }

  timeSolve(batch, tb);
  timeSolve(givens, tg);
  timeSolve(normal, tn);
  timeSolve(rls, tr);
  std::printf("\nCost (informational; measured with std::chrono::steady_clock, varies from run to run):\n");
  for (const Tally* t : {&tb, &tg, &tn, &tr})
    std::printf("  %-16s add(): %7.1f ns/sample over %llu samples; one solve() at n = %d: %.1f us\n", t->name,
                1e9 * t->foldSeconds / static_cast<double>(t->attempts),
                static_cast<unsigned long long>(t->attempts), kSamples - kFaultLength, 1e6 * t->solveSeconds);
  std::printf("  (BatchQr only stores the row in add(); its QR work happens in solve().)\n");

  if (g_failures != 0) {
    std::printf("\n%d sanity check(s) failed.\n", g_failures);
    return 1;
  }
  std::printf("\nAll sanity checks passed.\n");
  return 0;
}
