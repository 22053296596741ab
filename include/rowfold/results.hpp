/// @file
/// Value types returned by every estimator: Solution, Conditioning, Summary, Prediction.
#pragma once

#include <cstdint>
#include <limits>

#include "rowfold/detail/dims.hpp"
#include "rowfold/status.hpp"

namespace rowfold {

/// Coefficients of a fit. `status` is `ok` or `empty`; `flags` may carry `rank_deficient`
/// (dependent coefficients set to zero: the basic solution) or `too_few_samples`.
template <typename Scalar, int K, int MaxK = K>
struct Solution {
  using Vector = typename detail::Dims<Scalar, K, MaxK>::Vector;
  Vector coefficients;  ///< slopes b (K values)
  Scalar intercept = 0;  ///< b0 = ybar - xbar'b (0 with Intercept::none)
  Eigen::Index rank = 0;
  Status status = Status::empty;
  Flags flags;

  Solution() { coefficients.setZero(); }
  explicit Solution(Eigen::Index k) : coefficients(k) { coefficients.setZero(); }
};

/// How far the fit can be trusted numerically (NUMERICS §6).
template <typename Scalar, int K, int MaxK = K>
struct Conditioning {
  using Vector = typename detail::Dims<Scalar, K, MaxK>::Vector;
  /// 1-norm condition estimate of the column-equilibrated factor R D^-1 (Hager/Higham);
  /// governs the accuracy of a backward-stable QR solution.
  Scalar scaledCondition = 0;
  /// Estimate of kappa_1(X~'X~) = kappa_1(R)^2 (centered cross-product matrix, unscaled).
  Scalar gramCondition = 0;
  /// Least-squares condition kappa_s + kappa_s^2 tan(theta), tan(theta) = rho/||z||
  /// (Wedin 1973; Higham 2002 ch. 20): matters for large-residual fits.
  Scalar lsCondition = 0;
  Vector vif;  ///< variance inflation factor per regressor (uncentered with Intercept::none)
  Vector digits;  ///< estimated correct significant digits per slope (NUMERICS §6.5; conservative)
  Scalar interceptDigits = 0;  ///< the same for the intercept
  Eigen::Index rank = 0;  ///< numerical rank (column-pivoted QR of R D^-1)
  Flags flags;
  Status status = Status::empty;

  Conditioning() { vif.setZero(); digits.setZero(); }
  explicit Conditioning(Eigen::Index k) : vif(k), digits(k) { vif.setZero(); digits.setZero(); }
};

/// A full regression report. Under forgetting (lambda < 1) the variance and degrees of freedom
/// use the effective-sample-size correction documented in `estimator_base.hpp`.
template <typename Scalar, int K, int MaxK = K>
struct Summary {
  using Dims = detail::Dims<Scalar, K, MaxK>;
  using Vector = typename Dims::Vector;
  using Matrix = typename Dims::Matrix;

  Status status = Status::empty;
  Flags flags;
  Scalar level = Scalar(0.95);  ///< confidence level of the intervals
  Vector coefficients, standardErrors, tValues, lower, upper;
  Scalar intercept = 0, interceptStandardError = 0, interceptT = 0, interceptLower = 0, interceptUpper = 0;
  Matrix covariance;  ///< Cov(b) of the slopes
  Vector interceptCovariance;  ///< Cov(b0, b)
  Scalar residualStandardError = 0;  ///< s = sqrt(SSE / (n_eff-corrected dof))
  Scalar sse = 0, sst = 0;  ///< weighted residual and total (centered unless Intercept::none) sums of squares
  Scalar rSquared = 0, adjustedRSquared = 0, fStatistic = 0;
  Scalar residualDof = 0;  ///< degrees of freedom of s and of the t quantile
  Scalar tQuantile = 0;  ///< t_{(1+level)/2, residualDof}
  Scalar effectiveCount = 0, weightSum = 0;
  std::uint64_t count = 0;
  Eigen::Index parameters = 0;  ///< p = K (+1 with an intercept)
  Conditioning<Scalar, K, MaxK> conditioning;

  Summary() { resize(Dims::K == Eigen::Dynamic ? 0 : Dims::K); }
  explicit Summary(Eigen::Index k) { resize(k); }
  void resize(Eigen::Index k) {
    coefficients.setZero(k);
    standardErrors.setZero(k);
    tValues.setZero(k);
    lower.setZero(k);
    upper.setZero(k);
    covariance.setZero(k, k);
    interceptCovariance.setZero(k);
    conditioning = Conditioning<Scalar, K, MaxK>(k);
  }
};

/// What the windup guard and the outlier gate did since construction or reset() (diagnostics;
/// not part of a snapshot, and the only thing a gated sample changes).
struct GuardCounters {
  std::uint64_t heldForgetting = 0;      ///< samples whose information was folded without forgetting (gate)
  std::uint64_t floorRows = 0;           ///< pseudo-rows folded to keep a parked input at the information floor
  std::uint64_t rejectedInnovation = 0;  ///< refused: prediction error beyond the gate
  std::uint64_t rejectedLeverage = 0;    ///< refused: regressor leverage beyond the limit
  std::uint64_t lockoutReleases = 0;     ///< outliers accepted as a real change after a run of rejections
  std::uint64_t downweighted = 0;        ///< accepted with a reduced (Huber) weight
  std::uint64_t changeAlarms = 0;        ///< CUSUM alarms (each relaxed the information)
  std::uint64_t consecutiveRejections = 0;  ///< current run of refused samples
};

/// A prediction at a new x with its confidence interval (mean response) and prediction
/// interval (a new unit-weight observation).
template <typename Scalar>
struct Prediction {
  Scalar value = 0;
  Scalar standardError = 0;  ///< of the mean response
  Scalar confidenceLower = 0, confidenceUpper = 0;
  Scalar predictionLower = 0, predictionUpper = 0;
  Scalar leverage = 0;  ///< h0 = 1/W + ||R^-T (x0 - xbar)||^2 (scaled by the forgetting ratio)
  Status status = Status::empty;
  Flags flags;
};

}  // namespace rowfold
