/// @file
/// Scratch storage every estimator sizes once at construction, so that solve, summarize,
/// conditioning and predict never allocate (also for Eigen::Dynamic K).
#pragma once

#include <Eigen/Core>

#include "rowfold/detail/dims.hpp"
#include "rowfold/status.hpp"

namespace rowfold::detail {

/// How an estimator's factor relates to rounding errors in the data (NUMERICS §6.5).
enum class ErrorModel : std::uint8_t {
  refined_raw,  ///< solved against the raw stored data (BatchQr with refinement): columnwise error u
  online_qr,    ///< orthogonal updates of online-centered rows: error grows with |mean|/spread
  online_gram   ///< cross-product (normal-equation or P-form) state: squares the condition number
};

/// Scratch of the pivoted QR (detail/pivoted_qr.hpp).
template <typename Scalar, int K, int MaxK>
struct PivotWork {
  using D = Dims<Scalar, K, MaxK>;
  typename D::Vector tau, norms, rhs;
  Eigen::Matrix<Eigen::Index, K, 1, Eigen::ColMajor, MaxK, 1> perm;
  explicit PivotWork(Eigen::Index k) : tau(k), norms(k), rhs(k), perm(k) {
    tau.setZero();
    norms.setZero();
    rhs.setZero();
    perm.setZero();
  }
};

template <typename Scalar, int K, int MaxK>
struct Workspace {
  using D = Dims<Scalar, K, MaxK>;
  typename D::Matrix R, Rinv, scratch;
  typename D::Matrix1 aug, aug2;
  typename D::Vector z, b, xbar, v1, v2, v3, v4, scale;
  typename D::Vector1 v1aug, v2aug;
  PivotWork<Scalar, K, MaxK> pivoted;
  Scalar rho = 0, sst = 0, intercept = 0, ybar = 0, weight = 0;
  Eigen::Index rank = 0;
  Flags flags;

  Workspace() : pivoted(D::K == Eigen::Dynamic ? 0 : D::K) { resize(D::K == Eigen::Dynamic ? 0 : D::K); }
  explicit Workspace(Eigen::Index k) : pivoted(k) { resize(k); }
  void resize(Eigen::Index k) {
    aug.setZero(k + 1, k + 1);
    aug2.setZero(k + 1, k + 1);
    v1aug.setZero(k + 1);
    v2aug.setZero(k + 1);
    R.setZero(k, k);
    Rinv.setZero(k, k);
    scratch.setZero(k, k);
    z.setZero(k);
    b.setZero(k);
    xbar.setZero(k);
    v1.setZero(k);
    v2.setZero(k);
    v3.setZero(k);
    v4.setZero(k);
    scale.setZero(k);
  }
};

}  // namespace rowfold::detail
