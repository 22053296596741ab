/// @file
/// Statistics and conditioning computed once, from any estimator's triangular factor.
/// Input: a Workspace holding R (K x K upper triangular, R'R = centered weighted cross-products
/// X~'X~), z (R b = z), rho (rho^2 = weighted SSE), the estimator's best coefficients b,
/// the intercept, means, weight sum W and SST.
#pragma once

#include <cmath>
#include <limits>

#include "rowfold/detail/triangular.hpp"
#include "rowfold/detail/workspace.hpp"
#include "rowfold/options.hpp"
#include "rowfold/results.hpp"
#include "rowfold/student_t.hpp"

namespace rowfold::detail {

/// Sample-size facts the statistics need (from Centering).
template <typename Scalar>
struct SampleFacts {
  std::uint64_t count = 0;
  Scalar forget = 0;   ///< F = sum lambda^age
  Scalar forget2 = 0;  ///< F2 = sum lambda^(2 age)
  Intercept intercept = Intercept::fit;
  Scalar vifLimit = 10;
  ErrorModel model = ErrorModel::online_qr;
};

template <typename Scalar>
Scalar maxDigits() {
  return -std::log10(std::numeric_limits<Scalar>::epsilon() / Scalar(2));
}

template <typename Scalar>
Scalar digitsFromRelativeError(Scalar relerr) {
  if (!(relerr == relerr)) return Scalar(0);
  if (relerr <= Scalar(0)) return maxDigits<Scalar>();
  const Scalar d = -std::log10(relerr);
  return d < Scalar(0) ? Scalar(0) : (d > maxDigits<Scalar>() ? maxDigits<Scalar>() : d);
}

/// ws.Rinv = R^-1 by a triangular solve against the identity (coefficient-wise products are
/// used with it below: `lazyProduct` never allocates, whereas Eigen's blocked products may). Used for covariances, VIFs and
/// digit estimates only, never to solve for coefficients. Returns false if R is singular.
template <typename WS>
bool invertFactor(WS& ws) {
  const Eigen::Index k = ws.R.cols();
  for (Eigen::Index i = 0; i < k; ++i)
    if (!(ws.R(i, i) != 0) || !std::isfinite(ws.R(i, i))) return false;
  invertUpper(ws.R, ws.Rinv);
  return ws.Rinv.allFinite();
}

/// Conditioning of the factor in `ws` (NUMERICS §6.2-6.5). Calls invertFactor(ws).
///
/// Flags: with kappa_eff = kappa_s for QR-type estimators and kappa_s^2 for cross-product ones,
/// `ill_conditioned` when kappa_eff > u^-1/2 or fewer than a third of the working digits are
/// expected correct in some coefficient; `near_singular` when kappa_eff > 0.1/u, when some
/// coefficient is expected to have no correct digit, or when the rank is deficient.
template <typename Scalar, int K, int MaxK>
bool analyzeConditioning(Workspace<Scalar, K, MaxK>& ws, const SampleFacts<Scalar>& facts,
                         Conditioning<Scalar, K, MaxK>& out) {
  using std::abs;
  using std::sqrt;
  const Eigen::Index k = ws.R.cols();
  const Scalar u = std::numeric_limits<Scalar>::epsilon() / Scalar(2);
  const Scalar inf = std::numeric_limits<Scalar>::infinity();
  out.flags = Flags();
  out.status = Status::ok;

  columnNorms(ws.R, ws.scale);  // D_j = ||x~_j||
  for (Eigen::Index j = 0; j < k; ++j) ws.v4(j) = ws.scale(j) > Scalar(0) ? ws.scale(j) : Scalar(1);
  ws.scratch = ws.R.template triangularView<Eigen::Upper>();
  for (Eigen::Index j = 0; j < k; ++j) ws.scratch.col(j) /= ws.v4(j);

  // Numerical rank: column-pivoted QR of R D^-1 (Businger & Golub 1965).
  if (hasDependentColumn(ws.R)) {
    ws.Rinv = ws.scratch;  // pivoting works in place; Rinv is recomputed below
    out.rank = pivotedQrInPlace(ws.Rinv, ws.pivoted.rhs, ws.pivoted.perm, ws.pivoted.tau, ws.pivoted.norms,
                                dependenceTolerance<Scalar>(k));
  } else {
    out.rank = k;
  }
  if (out.rank < k) out.flags.set(Flag::rank_deficient);

  const Scalar ks = upperNorm1(ws.scratch) * inverseNorm1Estimate(ws.scratch, ws.v1, ws.v2, ws.v3);
  out.scaledCondition = ks;
  const Scalar kr = upperNorm1(ws.R) * inverseNorm1Estimate(ws.R, ws.v1, ws.v2, ws.v3);
  out.gramCondition = kr * kr;
  const Scalar znorm = ws.z.norm();
  const Scalar tanTheta = znorm > Scalar(0) ? ws.rho / znorm : (ws.rho > Scalar(0) ? inf : Scalar(0));
  out.lsCondition = ks + ks * ks * tanTheta;

  const bool invertible = invertFactor(ws);
  const bool gram = facts.model == ErrorModel::online_gram;
  const Scalar sqrtW = sqrt(ws.weight > Scalar(0) ? ws.weight : Scalar(0));
  const Scalar ynorm = sqrt(ws.sst > Scalar(0) ? ws.sst : Scalar(0));

  // Columnwise relative backward error eta_k of the data the factor represents. Online centering
  // rounds x - xbar with xbar itself carrying error ~u|xbar|, i.e. u |xbar| sqrt(W) / D_k relative
  // to the centered column (NUMERICS §4.1, §6.5).
  for (Eigen::Index j = 0; j < k; ++j) {
    Scalar eta = u;
    if (facts.model != ErrorModel::refined_raw && facts.intercept == Intercept::fit && ws.scale(j) > Scalar(0))
      eta = u * (Scalar(1) + abs(ws.xbar(j)) * sqrtW / ws.scale(j));
    ws.v1(j) = eta * ws.scale(j);  // eta_k D_k
  }
  Scalar etaY = u;
  if (facts.model != ErrorModel::refined_raw && facts.intercept == Intercept::fit && ynorm > Scalar(0))
    etaY = u * (Scalar(1) + abs(ws.ybar) * sqrtW / ynorm);

  Scalar minDigits = maxDigits<Scalar>();
  if (invertible) {
    const Scalar bscale = ws.v1.dot(ws.b.cwiseAbs());  // sum_k eta_k D_k |b_k|
    const Scalar dscale = ws.scale.dot(ws.b.cwiseAbs());  // sum_k D_k |b_k|
    for (Eigen::Index j = 0; j < k; ++j) {
      // C = (R'R)^-1 ; row j of C = Rinv.row(j) * Rinv'
      ws.v2.noalias() = ws.Rinv.row(j).lazyProduct(ws.Rinv.transpose()).transpose();
      Scalar err;
      if (!gram) {
        // First-order perturbation of a backward-stable QR solution (NUMERICS §6.5).
        err = ws.Rinv.row(j).norm() * (bscale + etaY * ynorm);
        // Large-residual term rho |C| eta D. Refinement on the augmented system with twofold
        // residuals removes it (Björck 1967), so it is omitted for refined_raw.
        if (facts.model != ErrorModel::refined_raw) err += ws.rho * ws.v2.cwiseAbs().dot(ws.v1);
      } else {
        // Cross-product state: |dM_kl| <~ eta D_k D_l, |dm_k| <~ eta D_k ||y~||.
        err = ws.v2.cwiseAbs().dot(ws.v1) * (dscale + ynorm);
      }
      ws.v3(j) = err;  // absolute error estimate of b_j
      out.digits(j) = digitsFromRelativeError(err / abs(ws.b(j)));
      if (out.digits(j) < minDigits) minDigits = out.digits(j);
      const Scalar vif = ws.v2(j) * ws.scale(j) * ws.scale(j);
      out.vif(j) = vif;
      if (vif > facts.vifLimit) out.flags.set(Flag::collinear);
    }
    if (facts.intercept == Intercept::fit) {
      Scalar err = u * (abs(ws.ybar) + ws.xbar.cwiseAbs().dot(ws.b.cwiseAbs()));
      err += ws.xbar.cwiseAbs().dot(ws.v3);
      out.interceptDigits = digitsFromRelativeError(err / abs(ws.intercept));
      if (out.interceptDigits < minDigits) minDigits = out.interceptDigits;
    } else {
      out.interceptDigits = maxDigits<Scalar>();
    }
  } else {
    out.vif.setConstant(inf);
    out.digits.setZero();
    out.interceptDigits = Scalar(0);
    minDigits = Scalar(0);
    out.flags.set(Flag::collinear);
  }

  const Scalar keff = gram ? ks * ks : ks;
  if (keff > Scalar(1) / sqrt(u) || minDigits < maxDigits<Scalar>() / Scalar(3)) out.flags.set(Flag::ill_conditioned);
  if (!(keff <= Scalar(0.1) / u) || minDigits < Scalar(1) || out.rank < k) out.flags.set(Flag::near_singular);
  return invertible;
}

/// Full regression statistics from the factor (NUMERICS §7.1-7.2). Under forgetting with
/// F = sum lambda^age, F2 = sum lambda^(2 age), q = F2/F, n_eff = F^2/F2:
///   s^2 = SSE / (F - p q),   Cov(b) = s^2 q (R'R)^-1,   t dof = n_eff - p,
/// which reduces to the ordinary s^2 = SSE/(n - p), Cov = s^2 (X~'X~)^-1, dof n - p at lambda = 1.
template <typename Scalar, int K, int MaxK>
void analyzeSummary(Workspace<Scalar, K, MaxK>& ws, const SampleFacts<Scalar>& facts, Scalar level,
                    Summary<Scalar, K, MaxK>& out) {
  using std::sqrt;
  const Eigen::Index k = ws.R.cols();
  const Scalar nan = std::numeric_limits<Scalar>::quiet_NaN();
  const bool withIntercept = facts.intercept == Intercept::fit;
  const Eigen::Index p = k + (withIntercept ? 1 : 0);
  const Scalar q = facts.forget > Scalar(0) ? facts.forget2 / facts.forget : Scalar(1);
  const Scalar neff = facts.forget2 > Scalar(0) ? facts.forget * facts.forget / facts.forget2 : Scalar(0);

  const bool invertible = analyzeConditioning(ws, facts, out.conditioning);
  out.flags = ws.flags;
  out.flags.set(out.conditioning.flags);
  out.status = Status::ok;
  out.level = level;
  out.count = facts.count;
  out.parameters = p;
  out.effectiveCount = neff;
  out.weightSum = ws.weight;
  out.coefficients = ws.b;
  out.intercept = ws.intercept;
  out.sse = ws.rho * ws.rho;
  out.sst = ws.sst;

  const Scalar sDenominator = facts.forget - Scalar(p) * q;
  out.residualDof = neff - Scalar(p);
  if (!(sDenominator > Scalar(0)) || !(out.residualDof > Scalar(0))) out.flags.set(Flag::too_few_samples);
  const Scalar s2 = sDenominator > Scalar(0) ? out.sse / sDenominator : nan;
  out.residualStandardError = sqrt(s2);
  out.tQuantile = out.residualDof > Scalar(0) ? studentTQuantile((Scalar(1) + level) / Scalar(2), out.residualDof) : nan;

  const Scalar r2 = out.sst > Scalar(0) ? Scalar(1) - out.sse / out.sst : nan;
  out.rSquared = r2;
  const Scalar n0 = withIntercept ? Scalar(1) : Scalar(0);
  out.adjustedRSquared = Scalar(1) - (Scalar(1) - r2) * (neff - n0) / (neff - Scalar(p));
  const Scalar modelDof = Scalar(p) - n0;
  out.fStatistic = ((out.sst - out.sse) / modelDof) / s2;

  if (invertible && out.conditioning.rank == k) {
    const Scalar scale = s2 * q;
    out.covariance.noalias() = ws.Rinv.lazyProduct(ws.Rinv.transpose());  // Rinv upper triangular
    out.covariance *= scale;
    for (Eigen::Index j = 0; j < k; ++j) out.standardErrors(j) = sqrt(out.covariance(j, j));
    if (withIntercept) {
      // Var(b0) = s^2 q (1/W + ||R^-T xbar||^2),  Cov(b0, b) = -Cov(b) xbar  (NUMERICS §4.2)
      ws.v1.noalias() = ws.Rinv.transpose().lazyProduct(ws.xbar);
      out.interceptStandardError = sqrt(scale * (Scalar(1) / ws.weight + ws.v1.squaredNorm()));
      out.interceptCovariance.noalias() = -(out.covariance.lazyProduct(ws.xbar));
    } else {
      out.interceptStandardError = Scalar(0);
      out.interceptCovariance.setZero();
    }
  } else {
    out.covariance.setConstant(nan);
    out.standardErrors.setConstant(nan);
    out.interceptStandardError = nan;
    out.interceptCovariance.setConstant(nan);
  }
  out.tValues = out.coefficients.cwiseQuotient(out.standardErrors);
  out.lower = out.coefficients - out.tQuantile * out.standardErrors;
  out.upper = out.coefficients + out.tQuantile * out.standardErrors;
  out.interceptT = withIntercept ? out.intercept / out.interceptStandardError : Scalar(0);
  out.interceptLower = out.intercept - out.tQuantile * out.interceptStandardError;
  out.interceptUpper = out.intercept + out.tQuantile * out.interceptStandardError;
}

/// Prediction at x0 with confidence and prediction intervals (NUMERICS §7.1):
/// yhat = b0 + x0'b, h0 = q (1/W + ||R^-T (x0 - xbar)||^2), CI yhat +- t s sqrt(h0),
/// PI yhat +- t s sqrt(1 + h0).
template <typename Scalar, int K, int MaxK, typename XD>
void analyzePrediction(Workspace<Scalar, K, MaxK>& ws, const SampleFacts<Scalar>& facts, Scalar level,
                       const Eigen::MatrixBase<XD>& x0, Prediction<Scalar>& out) {
  using std::sqrt;
  const Eigen::Index k = ws.R.cols();
  const Scalar nan = std::numeric_limits<Scalar>::quiet_NaN();
  const bool withIntercept = facts.intercept == Intercept::fit;
  const Eigen::Index p = k + (withIntercept ? 1 : 0);
  const Scalar q = facts.forget > Scalar(0) ? facts.forget2 / facts.forget : Scalar(1);
  const Scalar neff = facts.forget2 > Scalar(0) ? facts.forget * facts.forget / facts.forget2 : Scalar(0);
  out.status = Status::ok;
  out.flags = ws.flags;
  out.value = ws.intercept + x0.dot(ws.b);
  const Scalar sDenominator = facts.forget - Scalar(p) * q;
  const Scalar s2 = sDenominator > Scalar(0) ? ws.rho * ws.rho / sDenominator : nan;
  const Scalar dof = neff - Scalar(p);
  if (!(dof > Scalar(0))) out.flags.set(Flag::too_few_samples);
  if (withIntercept)
    ws.v1 = x0 - ws.xbar;
  else
    ws.v1 = x0;
  bool singular = false;
  for (Eigen::Index i = 0; i < k; ++i) singular = singular || !(ws.R(i, i) != Scalar(0));
  if (singular || hasDependentColumn(ws.R)) {
    out.flags.set(Flag::rank_deficient);
    out.leverage = nan;
  } else {
    forwardSubstituteTransposed(ws.R, ws.v1);
    out.leverage = q * ((withIntercept ? Scalar(1) / ws.weight : Scalar(0)) + ws.v1.squaredNorm());
  }
  const Scalar t = dof > Scalar(0) ? studentTQuantile((Scalar(1) + level) / Scalar(2), dof) : nan;
  const Scalar s = sqrt(s2);
  out.standardError = s * sqrt(out.leverage);
  const Scalar ci = t * out.standardError;
  const Scalar pi = t * s * sqrt(Scalar(1) + out.leverage);
  out.confidenceLower = out.value - ci;
  out.confidenceUpper = out.value + ci;
  out.predictionLower = out.value - pi;
  out.predictionUpper = out.value + pi;
}

}  // namespace rowfold::detail
