// rowfold on a microcontroller: online identification of an (invented) electric heater.
//
// The scenario is made up for this example. A heated block is driven by a PWM duty u (%) and
// measured once per second (y, degC). The firmware identifies the ARX model
//     y_k = a y_{k-1} + b u_{k-1} + c
// online, sample by sample, with two estimators side by side: rowfold::GivensQr<Scalar, 3> and
// rowfold::ForgettingRls<Scalar, 3>, forgetting factor 0.99 (memory ~100 s). The three ARX
// parameters are the K = 3 coefficients of the regressor vector (y_{k-1}, u_{k-1}, 1), with
// Intercept::none, so c comes out as an ordinary coefficient next to a and b. From them it
// derives the heater gain G = b/(1-a), the time constant tau = -1/ln(a) and the ambient
// temperature c/(1-a).
//
// The plant is simulated in the firmware (heater_plant.hpp). After 1000 s the cooling fan
// switches to high speed: tau drops from 39.5 s to 24.5 s and the gain from 0.8 to 0.6 degC/%,
// and the estimators must follow. Every 211th reading is a sensor dropout (NaN), which the
// estimators must refuse without changing state. At 1500 s both estimators are snapshotted,
// restored into fresh instances (after a damaged image has been refused), and the restored
// copies must then continue bit-identically.
//
// The image checks its own results and exits through semihosting: 0 if every check passed,
// 1 otherwise (statuses in board.h). Running it with "-append inject-fail" makes the final
// checks compare against a deliberately wrong truth, to prove that a failure reaches the host.
#include "eigen_on_target.hpp"

#include <rowfold/forgetting_rls.hpp>
#include <rowfold/givens_qr.hpp>

#include <cmath>
#include <cstring>
#include <limits>

#include "console.hpp"
#include "heater_plant.hpp"

#ifndef ROWFOLD_FW_SCALAR
#define ROWFOLD_FW_SCALAR float
#endif

namespace {

using Scalar = ROWFOLD_FW_SCALAR;
constexpr int K = 3;
using Qr = rowfold::GivensQr<Scalar, K>;
using Rls = rowfold::ForgettingRls<Scalar, K>;
using Regressors = Eigen::Matrix<Scalar, K, 1>;
using rowfold::Status;
using Model = heater::Model<Scalar>;

constexpr int kSamples = 2000;      // seconds of simulated operation (1 Hz)
constexpr int kFanChange = 1000;    // the cooling fan switches to high speed here
constexpr int kSnapshotAt = 1500;   // checkpoint and restore
constexpr int kDropoutEvery = 211;  // sensor dropout period (NaN reading)
constexpr double kForgetting = 0.99;
constexpr Scalar kDisturbance = Scalar(0.02);  // degC, standard deviation of e_k

// Truth before and after the fan change (h = 1 s): G = 0.8 then 0.6 degC/%, T_amb = 22 degC.
constexpr Model kFanLow{Scalar(0.975), Scalar(0.02), Scalar(0.55)};
constexpr Model kFanHigh{Scalar(0.96), Scalar(0.024), Scalar(0.88)};

template <typename Options>
Options identificationOptions() {
  Options o;
  o.forgetting = kForgetting;
  o.intercept = rowfold::Intercept::none;  // c is the coefficient of the constant regressor
  return o;
}

// Estimators and image buffers live in static storage, as they would in a product.
Qr g_qr(identificationOptions<Qr::Options>());
Rls g_rls(identificationOptions<Rls::Options>());
Qr g_qrRestored(identificationOptions<Qr::Options>());
Rls g_rlsRestored(identificationOptions<Rls::Options>());
unsigned char g_image[2][512];
unsigned char g_imageAgain[2][512];

fw::Checks g_checks;

// Tolerances (the data carry a disturbance of 0.02 degC; the identification window is ~100 s).
// They are loose against the estimators' own standard errors (a few 1e-4 on a) and tight
// against anything a broken fit would produce.
struct Tolerance {
  Scalar a = Scalar(2e-3), b = Scalar(1.5e-3), c = Scalar(0.12);
  Scalar gainRelative = Scalar(0.05), tauRelative = Scalar(0.08), ambient = Scalar(0.5);
};

Scalar relative(Scalar value, Scalar truth) {
  return std::abs(value - truth) / std::abs(truth);
}

template <typename Estimator>
void evaluate(const char* who, const Estimator& est, const Model& truth, const char* when) {
  const auto sol = est.solve();
  const auto rep = est.summarize(Scalar(0.95));
  const Model fit{sol.coefficients(0), sol.coefficients(1), sol.coefficients(2)};
  const Tolerance tol;

  fw::Line line;
  line << when << ' ' << who << ": a=";
  line.real(fit.a) << " b=";
  line.real(fit.b) << " c=";
  line.real(fit.c) << " | G=";
  line.real(fit.gain(), 4) << " degC/% tau=";
  line.real(fit.timeConstant(), 4) << " s T_amb=";
  line.real(fit.ambient(), 4) << " degC s_e=";
  line.real(rep.residualStandardError, 3) << " n_eff=";
  line.real(rep.effectiveCount, 4) << '\n';
  line.flush();

  g_checks.that("solve() status ok", sol.status == Status::ok);
  g_checks.that("solve() raised no flag", !sol.flags.any());
  g_checks.that("solve() full rank", sol.rank == K);
  g_checks.that("summarize() status ok", rep.status == Status::ok);
  g_checks.that("summarize() raised no numerical flag", !rep.flags.has(rowfold::Flag::near_singular) &&
                                                            !rep.flags.has(rowfold::Flag::lost_definiteness) &&
                                                            !rep.flags.has(rowfold::Flag::rank_deficient));
  g_checks.near("a", fit.a, truth.a, tol.a);
  g_checks.near("b", fit.b, truth.b, tol.b);
  g_checks.near("c", fit.c, truth.c, tol.c);
  g_checks.near("gain (relative)", relative(fit.gain(), truth.gain()), Scalar(0), tol.gainRelative);
  g_checks.near("time constant (relative)", relative(fit.timeConstant(), truth.timeConstant()), Scalar(0),
                tol.tauRelative);
  g_checks.near("ambient", fit.ambient(), truth.ambient(), tol.ambient);
  // The reported residual standard error must recognise the disturbance level.
  g_checks.near("residual standard error", rep.residualStandardError, kDisturbance, Scalar(0.3) * kDisturbance);
  // The reported 95 % confidence intervals must be honest: truth within 4 standard errors.
  const Scalar truthVector[K] = {truth.a, truth.b, truth.c};
  const char* const label[K] = {"a within 4 reported standard errors", "b within 4 reported standard errors",
                                "c within 4 reported standard errors"};
  for (int j = 0; j < K; ++j)
    g_checks.that(label[j], std::abs(rep.coefficients(j) - truthVector[j]) <= Scalar(4) * rep.standardErrors(j));
}

// GivensQr and ForgettingRls solve the same exponentially weighted problem: they must agree
// far more closely than either agrees with the truth.
void compareEstimators(const char* when) {
  const auto q = g_qr.solve();
  const auto r = g_rls.solve();
  const Scalar agree = std::numeric_limits<Scalar>::digits > 30 ? Scalar(1e-9) : Scalar(1e-3);
  Scalar worst = 0;
  for (int j = 0; j < K; ++j) {
    const Scalar d = std::abs(q.coefficients(j) - r.coefficients(j)) / (Scalar(1) + std::abs(q.coefficients(j)));
    worst = d > worst ? d : worst;
  }
  fw::Line line;
  line << when << " GivensQr vs ForgettingRls: largest relative difference ";
  line.real(worst, 2) << '\n';
  line.flush();
  g_checks.near("GivensQr and ForgettingRls agree", worst, Scalar(0), agree);
  g_checks.that("ForgettingRls runs recursively", g_rls.recursive());
}

template <typename Estimator>
std::size_t takeImage(const Estimator& est, unsigned char* buffer, std::size_t capacity) {
  std::size_t written = 0;
  g_checks.that("snapshot() ok", est.snapshot(buffer, capacity, written) == Status::ok);
  g_checks.that("snapshot size as announced", written == est.snapshotSize());
  return written;
}

void checkpoint() {
  const std::size_t qrBytes = takeImage(g_qr, g_image[0], sizeof g_image[0]);
  const std::size_t rlsBytes = takeImage(g_rls, g_image[1], sizeof g_image[1]);

  // A damaged image (one flipped bit) is refused and leaves the target untouched.
  g_image[0][qrBytes / 2] ^= 0x10u;
  g_checks.that("damaged image refused", g_qrRestored.restore(g_image[0], qrBytes) == Status::corrupt_image);
  g_checks.that("refused image left the state untouched", g_qrRestored.count() == 0);
  g_image[0][qrBytes / 2] ^= 0x10u;
  // An image of another estimator is refused too.
  g_checks.that("foreign image refused", g_rlsRestored.restore(g_image[0], qrBytes) == Status::image_mismatch);

  g_checks.that("GivensQr restore() ok", g_qrRestored.restore(g_image[0], qrBytes) == Status::ok);
  g_checks.that("ForgettingRls restore() ok", g_rlsRestored.restore(g_image[1], rlsBytes) == Status::ok);
  g_checks.that("restored counts match",
                g_qrRestored.count() == g_qr.count() && g_rlsRestored.count() == g_rls.count());

  fw::Line line;
  line << "t=" << kSnapshotAt << " s checkpoint: GivensQr image " << static_cast<unsigned>(qrBytes)
       << " B, ForgettingRls image " << static_cast<unsigned>(rlsBytes) << " B, both restored\n";
  line.flush();
}

template <typename Estimator>
bool sameCoefficients(const Estimator& x, const Estimator& y) {
  const auto s = x.solve();
  const auto t = y.solve();
  return std::memcmp(s.coefficients.data(), t.coefficients.data(), sizeof(Scalar) * K) == 0 &&
         s.intercept == t.intercept && s.status == t.status;
}

template <typename Estimator>
bool sameImages(const Estimator& x, const Estimator& y) {
  std::size_t nx = 0, ny = 0;
  if (x.snapshot(g_imageAgain[0], sizeof g_imageAgain[0], nx) != Status::ok) return false;
  if (y.snapshot(g_imageAgain[1], sizeof g_imageAgain[1], ny) != Status::ok) return false;
  return nx == ny && std::memcmp(g_imageAgain[0], g_imageAgain[1], nx) == 0;
}

bool commandLineAsks(const char* word) {
  static char text[128];
  board_command_line(text, sizeof text);
  const std::size_t n = std::strlen(word);
  for (const char* p = text; *p != '\0'; ++p)
    if (std::strncmp(p, word, n) == 0) return true;
  return false;
}

}  // namespace

int main() {
  board_stack_paint();
  const bool injectFailure = commandLineAsks("inject-fail");
  {
    fw::Line line;
    line << "rowfold firmware example: heater identification (invented scenario), Scalar="
         << (sizeof(Scalar) == 4 ? "float" : "double") << ", K=3, lambda=0.99, " << kSamples << " samples at 1 Hz\n";
    line.flush();
  }
  g_checks.that("estimators constructed ok", g_qr.status() == Status::ok && g_rls.status() == Status::ok);

  heater::Plant<Scalar> plant(kFanLow, Scalar(22), kDisturbance, 0x2545F491u);
  heater::DutyProfile<Scalar> duty(0x6C078965u);
  const Scalar nan = std::numeric_limits<Scalar>::quiet_NaN();

  Scalar yPrev = plant.temperature();
  Scalar uPrev = duty.next();
  unsigned unexpectedStatus = 0, refused = 0;
  bool restored = false;
  for (int t = 1; t <= kSamples; ++t) {
    if (t == kFanChange) plant.setModel(kFanHigh);
    const Scalar y = plant.step(uPrev);
    const Scalar reading = t % kDropoutEvery == 0 ? nan : y;

    const Regressors phi(yPrev, uPrev, Scalar(1));
    const Status expected = std::isfinite(reading) && std::isfinite(yPrev) ? Status::ok : Status::nonfinite_input;
    const std::uint64_t before = g_qr.count();
    Status s[4] = {g_qr.add(phi, reading), g_rls.add(phi, reading), Status::ok, Status::ok};
    if (restored) {
      s[2] = g_qrRestored.add(phi, reading);
      s[3] = g_rlsRestored.add(phi, reading);
    }
    const int active = restored ? 4 : 2;
    for (int i = 0; i < active; ++i)
      if (s[i] != expected) ++unexpectedStatus;
    if (expected != Status::ok) {
      ++refused;
      if (g_qr.count() != before) ++unexpectedStatus;
    }

    yPrev = reading;
    uPrev = duty.next();

    if (t == kFanChange - 1) {
      evaluate("GivensQr     ", g_qr, kFanLow, "t=999 s  fan low ");
      evaluate("ForgettingRls", g_rls, kFanLow, "t=999 s  fan low ");
      compareEstimators("t=999 s ");
    }
    if (t == kSnapshotAt) {
      checkpoint();
      restored = true;
    }
  }

  Model truth = kFanHigh;
  if (injectFailure) {
    board_write("inject-fail: checking against a wrong truth (a + 0.01); the checks below must fail\n");
    truth.a += Scalar(0.01);
  }
  evaluate("GivensQr     ", g_qr, truth, "t=2000 s fan high");
  evaluate("ForgettingRls", g_rls, truth, "t=2000 s fan high");
  compareEstimators("t=2000 s");

  // Dropouts: each NaN reading is refused twice (as y_k, then as the regressor y_{k-1}).
  const unsigned dropouts = kSamples / kDropoutEvery;
  g_checks.that("every add() returned the expected status", unexpectedStatus == 0);
  g_checks.that("each dropout refused as reading and as regressor", refused == 2 * dropouts);
  g_checks.that("accepted sample count",
                g_qr.count() == static_cast<std::uint64_t>(kSamples - refused) && g_rls.count() == g_qr.count());
  g_checks.that("restored GivensQr continued bit-identically", sameCoefficients(g_qr, g_qrRestored));
  g_checks.that("restored ForgettingRls continued bit-identically", sameCoefficients(g_rls, g_rlsRestored));
  g_checks.that("restored GivensQr image identical", sameImages(g_qr, g_qrRestored));
  g_checks.that("restored ForgettingRls image identical", sameImages(g_rls, g_rlsRestored));

  fw::Line line;
  line << "refused " << refused << " samples (" << dropouts << " dropouts); sizeof GivensQr " << sizeof(Qr)
       << " B, ForgettingRls " << sizeof(Rls) << " B; stack used " << static_cast<unsigned>(board_stack_used())
       << " of " << static_cast<unsigned>(board_stack_reserved()) << " B\n";
  line.flush();
  line << (g_checks.failed() == 0 ? "PASS" : "FAIL") << ": " << g_checks.run() - g_checks.failed() << '/'
       << g_checks.run() << " checks passed\n";
  line.flush();
  return g_checks.failed() == 0 ? BOARD_EXIT_PASS : BOARD_EXIT_CHECK_FAILED;
}
