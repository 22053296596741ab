/// @file
/// State of the windup guard and the outlier gate (options in options.hpp, flow in
/// estimator_base.hpp): the forgotten spread of each regressor and its peak, the nominal model
/// for regularized forgetting, the robust running scale of the prediction errors and the CUSUM
/// statistic.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>

#include "rowfold/detail/dims.hpp"
#include "rowfold/status.hpp"

namespace rowfold::detail {

template <typename Scalar, int K, int MaxK>
struct GuardState {
  using Vector = typename Dims<Scalar, K, MaxK>::Vector;
  Vector spread;   ///< D_j = forgotten sum of (scaled, centered) x_j^2 = diag(M), tracked in O(K)
  Vector peak;     ///< largest D_j seen
  Vector nominal;  ///< theta0 of regularized forgetting (kept by reset, like an option)
  Scalar scale2 = 0;  ///< s^2, robust running scale of the normalized squared prediction error
  Scalar warmSum = 0;
  std::uint32_t warmCount = 0;
  std::uint32_t cycle = 0;  ///< next input of the regularization pseudo-row
  Scalar cusum = 0;
  std::uint16_t lastFlags = 0;  ///< low_excitation / windup_guarded of the latest sample

  explicit GuardState(Eigen::Index k) : spread(k), peak(k), nominal(k) {
    nominal.setZero();
    reset();
  }
  void reset() {
    spread.setZero();
    peak.setZero();
    scale2 = Scalar(0);
    warmSum = Scalar(0);
    warmCount = 0;
    cycle = 0;
    cusum = Scalar(0);
    lastFlags = 0;
  }
  bool scaleReady(int warmup) const { return warmCount >= static_cast<std::uint32_t>(warmup); }

  /// After a fold with step factor lam of the row whose x part is `phi`, folded with weight
  /// `delta` (1 for a scaled row; c^2 for the unscaled centered row of the square-root-free path).
  template <typename DV>
  void foldSpread(Scalar lam, const Eigen::MatrixBase<DV>& phi, Scalar delta = Scalar(1)) {
    constexpr int N = int(DV::SizeAtCompileTime);  // K, or a per-size copy's length (dims.hpp)
    decltype(auto) s = sizedAs<N>(spread);
    decltype(auto) p = sizedAs<N>(peak);
    s = lam * s + delta * phi.cwiseAbs2();
    p = p.cwiseMax(s);
  }
  /// Robust scale: the mean of q over the warm-up, then s^2 <- a s^2 + (1 - a) min(q, c^2 s^2).
  void foldScale(Scalar q, int warmup, Scalar memory, Scalar clip2) {
    if (!scaleReady(warmup)) {
      warmSum += q;
      ++warmCount;
      if (scaleReady(warmup)) scale2 = warmSum / Scalar(warmCount);
      return;
    }
    const Scalar a = Scalar(1) - Scalar(1) / memory;
    const Scalar capped = q < clip2 * scale2 ? q : clip2 * scale2;
    scale2 = a * scale2 + (Scalar(1) - a) * capped;
  }

  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    v.array(self.spread.data(), static_cast<std::size_t>(self.spread.size()));
    v.array(self.peak.data(), static_cast<std::size_t>(self.peak.size()));
    v.array(self.nominal.data(), static_cast<std::size_t>(self.nominal.size()));
    v.field(self.scale2);
    v.field(self.warmSum);
    v.field(self.warmCount);
    v.field(self.cycle);
    v.field(self.cusum);
    v.field(self.lastFlags);
  }
};

}  // namespace rowfold::detail
