// Size probe: one estimator per image, to measure what it costs in flash and RAM.
//
// Built once per (estimator, K) with
//   ROWFOLD_FW_PROBE      0 = no estimator (the baseline: start-up, console, checks),
//                         1 = GivensQr, 2 = ForgettingRls, 3 = NormalEquations, 4 = BatchQr
//   ROWFOLD_FW_PROBE_K    number of regressors
//   ROWFOLD_FW_PROBE_ROWS BatchQr capacity (rows kept)
//   ROWFOLD_FW_PROBE_SUMMARIZE  1 (default): add + solve + summarize; 0: add + solve only
// Scalar is float. The estimator lives in static storage, so its sizeof shows up in .bss.
// The image fits a small synthetic problem (y = 1 + sum_j 0.5 (j+1) x_j + noise), checks the
// result and prints one machine-readable line:
//   PROBE name=<estimator> K=<K> sizeof=<B> workspace=<B> minimum=<B> stack=<B>
// where `workspace` is the query scratch inside the object (sizeof of the Workspace and the
// cached Solution; BatchQr also keeps its solve-time design copy) and `minimum` the smallest
// state that could carry the same information (how it is counted: see minimumStateBytes()).
#include "eigen_on_target.hpp"

#include <rowfold/batch_qr.hpp>
#include <rowfold/forgetting_rls.hpp>
#include <rowfold/givens_qr.hpp>
#include <rowfold/normal_equations.hpp>

#include <cstdint>

#include "console.hpp"
#include "heater_plant.hpp"

#ifndef ROWFOLD_FW_PROBE
#define ROWFOLD_FW_PROBE 1
#endif
#ifndef ROWFOLD_FW_PROBE_K
#define ROWFOLD_FW_PROBE_K 4
#endif
#ifndef ROWFOLD_FW_PROBE_ROWS
#define ROWFOLD_FW_PROBE_ROWS 32
#endif
#ifndef ROWFOLD_FW_PROBE_SUMMARIZE
#define ROWFOLD_FW_PROBE_SUMMARIZE 1
#endif

namespace {

using Scalar = float;
constexpr int K = ROWFOLD_FW_PROBE_K;
constexpr int kRows = ROWFOLD_FW_PROBE_ROWS;
constexpr int kSamples = kRows < 3 * K ? kRows : 3 * K;
static_assert(kSamples > K + 1, "rowfold size probe: too few rows for K");

// Smallest state, in bytes, that carries the information each estimator keeps between samples
// (configuration such as lambda is not counted):
//   centering    K means of x, mean of y, weight sum W, forgetting sums F and F2, centered
//                sum of squares of y  -> K + 5 scalars, plus a 64-bit sample counter;
//   GivensQr     upper triangle of the augmented factor [R z; 0 rho]: (K+1)(K+2)/2 scalars;
//   NormalEq.    lower triangle of the augmented co-moments [M m; m' Syy]: (K+1)(K+2)/2;
//   Forg.Rls     lower triangle of P K(K+1)/2, theta K, SSE 1, two flags (1 byte each);
//   BatchQr      the rows kept, x (K), y and weight per row, plus the 64-bit row counter
//                (its means and sums are recomputed from the rows at solve time).
constexpr std::size_t S = sizeof(Scalar);
constexpr std::size_t kCentering = (K + 5) * S + 8;
constexpr std::size_t kTriangle1 = static_cast<std::size_t>((K + 1) * (K + 2) / 2) * S;

template <int Which>
struct Probe;

template <>
struct Probe<1> {
  using Estimator = rowfold::GivensQr<Scalar, K>;
  static constexpr const char* name = "GivensQr";
  static constexpr std::size_t minimum = kTriangle1 + kCentering;
  static constexpr std::size_t extraScratch = 0;
};
template <>
struct Probe<2> {
  using Estimator = rowfold::ForgettingRls<Scalar, K>;
  static constexpr const char* name = "ForgettingRls";
  static constexpr std::size_t minimum = static_cast<std::size_t>(K * (K + 1) / 2 + K + 1) * S + 2 + kCentering;
  static constexpr std::size_t extraScratch = 0;
};
template <>
struct Probe<3> {
  using Estimator = rowfold::NormalEquations<Scalar, K>;
  static constexpr const char* name = "NormalEquations";
  static constexpr std::size_t minimum = kTriangle1 + kCentering;
  static constexpr std::size_t extraScratch = 0;
};
template <>
struct Probe<4> {
  using Estimator = rowfold::BatchQr<Scalar, K, kRows>;
  static constexpr const char* name = "BatchQr";
  static constexpr std::size_t minimum = static_cast<std::size_t>(kRows * (K + 2)) * S + 8;
  // Solve-time copies kept inside the object: design (rows x (K+1)), three row vectors and
  // five (K+1) vectors; the Eigen size fields of the dynamic-row buffers are not counted.
  static constexpr std::size_t extraScratch = static_cast<std::size_t>(kRows * (K + 1) + 3 * kRows + 5 * (K + 1)) * S;
};

fw::Checks g_checks;

#if ROWFOLD_FW_PROBE != 0
using P = Probe<ROWFOLD_FW_PROBE>;
using Estimator = P::Estimator;
Estimator g_estimator;  // static storage: counted in .bss

void exercise() {
  heater::Rng rng(0x1234567u);
  Eigen::Matrix<Scalar, K, 1> x;
  for (int i = 0; i < kSamples; ++i) {
    Scalar y = Scalar(1);
    for (int j = 0; j < K; ++j) {
      x(j) = Scalar(2) * rng.uniform<Scalar>() - Scalar(1);
      y += Scalar(0.5) * Scalar(j + 1) * x(j);
    }
    y += Scalar(0.01) * rng.gaussian<Scalar>();
    g_checks.that("add() ok", g_estimator.add(x, y) == rowfold::Status::ok);
  }
  const auto sol = g_estimator.solve();
  g_checks.that("solve() ok", sol.status == rowfold::Status::ok);
  g_checks.near("intercept", sol.intercept, Scalar(1), Scalar(0.05));
  for (int j = 0; j < K; ++j) g_checks.near("slope", sol.coefficients(j), Scalar(0.5) * Scalar(j + 1), Scalar(0.05));
#if ROWFOLD_FW_PROBE_SUMMARIZE
  const auto rep = g_estimator.summarize(Scalar(0.95));
  g_checks.that("summarize() ok", rep.status == rowfold::Status::ok);
  g_checks.that("R^2 near 1", rep.rSquared > Scalar(0.99));
#endif
}
#endif

}  // namespace

int main() {
  board_stack_paint();
  fw::Line line;
#if ROWFOLD_FW_PROBE != 0
  exercise();
  using Ws = Estimator::WorkspaceType;
  using Sol = Estimator::SolutionType;
  const std::size_t workspace = sizeof(Ws) + sizeof(Sol) + P::extraScratch;
  line << "PROBE name=" << P::name << (ROWFOLD_FW_PROBE_SUMMARIZE ? "" : "(no-summarize)") << " K=" << K
       << " sizeof=" << static_cast<unsigned>(sizeof(Estimator)) << " workspace=" << static_cast<unsigned>(workspace)
       << " minimum=" << static_cast<unsigned>(P::minimum);
#else
  line << "PROBE name=baseline K=" << K << " sizeof=0 workspace=0 minimum=0";
#endif
  line << " stack=" << static_cast<unsigned>(board_stack_used()) << '\n';
  line.flush();
  if (g_checks.failed() != 0) {
    board_write("FAIL\n");
    return BOARD_EXIT_CHECK_FAILED;
  }
  return BOARD_EXIT_PASS;
}
