// NormalEquations' addRows in its row form (detail/gram_block.hpp: row-major X, each row copied
// whole and multiplied out by GramKernel::rowLower). By default that form is chosen only with
// AVX-512; this suite is built with ROWFOLD_GRAM_ROW_FORM_FROM=2 (tests/CMakeLists.txt), so it
// runs on every target, with that target's packets. NIST certified values through the row form
// are checked by test_nist_row_form (test_nist.cpp in the same forced build).
#include <doctest/doctest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <random>
#include <vector>

#include "rowfold/rowfold.hpp"

#if ROWFOLD_GRAM_ROW_FORM_FROM != 2
#error "test_row_form is built with ROWFOLD_GRAM_ROW_FORM_FROM=2 (see tests/CMakeLists.txt)"
#endif

namespace {

using rowfold::Status;
using RowMat = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

// Row form against add() row by row. Both compute the same co-moments in exact arithmetic (the
// pairwise merge of Chan, Golub & LeVeque 1983, Am. Stat. 37(3):242-247); recursive summation
// of n terms errs by at most n u sum|terms| (Higham 2002, Accuracy and Stability of Numerical
// Algorithms, §4.2), and sum|u_i u_j| <= sqrt(G_ii G_jj) (Cauchy-Schwarz): tolerance 16 n u
// sqrt(G_ii G_jj), as in test_properties' block test (16: centering, weights, block means).
template <typename E>
void rowFormEqualsRows(Eigen::Index k, double lambda, bool weighted, rowfold::Intercept mode, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0, 1);
  const Eigen::Index n = 1003;  // several blocks and a partial one at every k
  RowMat X(n, k);
  Eigen::VectorXd y(n), w(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < k; ++j) X(i, j) = 4.0 * double(j + 1) + g(rng);  // means well off zero
    y(i) = 2.0 + 0.5 * X.row(i).sum() + g(rng);
    w(i) = i % 7 == 3 ? 0.0 : 0.5 + double(i % 5);  // zero weights too
  }
  typename E::Options o;
  o.forgetting = lambda;
  o.intercept = mode;
  o.windup.enabled = false;  // addRows' one-pass path (the guard folds row by row)
  E rows(k, o), block(k, o);
  for (Eigen::Index i = 0; i < n; ++i)
    REQUIRE(rows.add(Eigen::VectorXd(X.row(i).transpose()), y(i), weighted ? w(i) : 1.0) == Status::ok);
  REQUIRE((weighted ? block.addRows(X, y, w) : block.addRows(X, y)) == Status::ok);
  CHECK(block.count() == rows.count());
  const double tol = 16.0 * double(n) * std::numeric_limits<double>::epsilon();
  const auto& A = rows.comoments();
  const auto& B = block.comoments();
  for (Eigen::Index j = 0; j <= k; ++j) {
    const double mean = j < k ? rows.centering().xMean()(j) : rows.centering().yMean();
    const double meanB = j < k ? block.centering().xMean()(j) : block.centering().yMean();
    CHECK(std::abs(meanB - mean) <= tol * (std::abs(mean) + std::sqrt(A(j, j) / rows.weightSum())));
    for (Eigen::Index i = j; i <= k; ++i) CHECK(std::abs(B(i, j) - A(i, j)) <= tol * std::sqrt(A(i, i) * A(j, j)));
  }
}

}  // namespace

TEST_CASE("NormalEquations::addRows, row form: equals folding row by row (to rounding)") {
  std::uint64_t seed = 31;
  for (double lambda : {1.0, 0.97})
    for (bool weighted : {false, true})
      for (auto mode : {rowfold::Intercept::fit, rowfold::Intercept::none}) {
        CAPTURE(lambda);
        CAPTURE(weighted);
        CAPTURE(static_cast<int>(mode));
        // k = 1..40 at runtime: one, several and a partial packet per row on every target.
        for (Eigen::Index k : {1, 3, 8, 17, 40}) {
          CAPTURE(k);
          rowFormEqualsRows<rowfold::NormalEquations<double, Eigen::Dynamic>>(k, lambda, weighted, mode, seed++);
        }
        rowFormEqualsRows<rowfold::NormalEquations<double, 16>>(16, lambda, weighted, mode, seed++);
      }
}

TEST_CASE("NormalEquations::addRows, row form: a bad row in a late block leaves the state untouched") {
  // The rule of every addRows: the Status of the first bad row, nothing folded. Checked on the
  // object's bytes (fixed K: the state and the scratch, which a refusal clears).
  using E = rowfold::NormalEquations<double, 5>;
  std::mt19937_64 rng(7);
  std::normal_distribution<double> g(0, 1);
  const Eigen::Index n = 3000, bad = 2345;
  RowMat X(n, 5);
  Eigen::VectorXd y(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    for (Eigen::Index j = 0; j < 5; ++j) X(i, j) = g(rng);
    y(i) = X.row(i).sum() + g(rng);
  }
  E est;
  for (int i = 0; i < 10; ++i) REQUIRE(est.add(Eigen::VectorXd(X.row(i).transpose()), y(i)) == Status::ok);
  static unsigned char before[sizeof(E)];
  std::memcpy(before, static_cast<const void*>(&est), sizeof(E));
  for (int col : {1, 5}) {
    CAPTURE(col);
    RowMat Xb = X;
    Eigen::VectorXd yb = y;
    if (col < 5) Xb(bad, col) = std::numeric_limits<double>::quiet_NaN();
    if (col == 5) yb(bad) = std::numeric_limits<double>::infinity();
    CHECK(est.addRows(Xb, yb) == Status::nonfinite_input);
    CHECK(est.count() == 10);
    CHECK(std::memcmp(before, static_cast<const void*>(&est), sizeof(E)) == 0);
  }
  REQUIRE(est.addRows(X, y) == Status::ok);
  CHECK(est.count() == 10 + static_cast<std::uint64_t>(n));
}
