/// @file
/// Option structs for the rowfold estimators (plain values, validated at construction).
#pragma once

#include <cmath>
#include <cstdint>

#include "rowfold/status.hpp"

namespace rowfold {

/// Whether the model carries an intercept. `fit` centers every sample on running weighted
/// means (deviation variables) and recovers b0 = ybar - xbar'b; `none` fits through the origin.
enum class Intercept : std::uint8_t { fit, none };

/// Windup protection of the forgetting estimators (GivensQr, NormalEquations, ForgettingRls;
/// acts only when forgetting < 1). With lambda < 1, information in directions the data stop
/// exciting decays like lambda^t until the factor under/overflows ("estimator windup", Åström &
/// Wittenmark 1995 §11.2; NUMERICS §2). The default guard
///  - holds the forgetting of the slope information back when the sample carries little
///    information: h = phi' M^-1 phi < informationGate (1 - lambda), phi the scaled centered
///    regressors (conditional updating; Egardt 1979, Å&W 1995). The means, W and the residual
///    sum are still forgotten, so the level keeps tracking;
///  - keeps every regressor's forgotten spread M_jj at or above spreadFloor times the largest it
///    has had, by folding a pseudo-row for a starved input at its current slope (a floor on the
///    information per input: a stuck or parked input cannot wind up, and forgetting goes on in
///    the directions that are excited).
/// Options add regularized forgetting toward a nominal model, the variable forgetting factor of
/// Fortescue, Kershenbaum & Ydstie (1981) and relaxation on a change alarm (CUSUM).
struct WindupOptions {
  bool enabled = true;
  /// Forget only when h >= informationGate (1 - lambda). A typical excited sample has
  /// h ~ K (1 - lambda); 0.05 keeps the gate far below that (our choice). 0 disables the gate.
  double informationGate = 0.05;
  /// Information floor per regressor, as a fraction of its peak spread (bounds the growth of
  /// P per input to about 1/spreadFloor). 0 disables the floor.
  double spreadFloor = 1e-3;
  /// delta > 0: regularized forgetting toward the nominal model theta0 (setNominal):
  /// M_t = lambda M + phi phi' + (1 - lambda) delta I, realized as one pseudo-row per sample
  /// (cycling over the inputs; Kulhavý & Zarrop 1993; Gunnarsson 1996; NUMERICS §2.2). In the
  /// units of the centered regressors' squares; keep it small against the information.
  double regularization = 0.0;
  /// Variable forgetting (Fortescue, Kershenbaum & Ydstie 1981, Automatica 17(6)):
  /// lambda_t = 1 - (1 - h/(1 + h)) q / (s^2 N0), N0 = 1/(1 - lambda), clamped to
  /// [minForgetting, 1]; q the normalized squared prediction error, s the robust running scale.
  bool variableForgetting = false;
  double minForgetting = 0.9;
  /// > 0: CUSUM of normalized squared prediction errors, g = max(0, g + z^2 - 1 - changeDrift);
  /// when g exceeds changeThreshold the information is relaxed by changeRelax (see relax()).
  double changeThreshold = 0.0;
  double changeDrift = 1.0;
  double changeRelax = 0.1;
};

/// The outlier gate (NUMERICS §10): before a sample is folded its prediction error
/// e = y - yhat is compared with the robust running scale s: q = e^2 / (1/w + 1/W + h_x) with
/// h_x = d' M^-1 d the leverage of the centered regressors; reject when q > threshold^2 s^2
/// (Status::outlier: state untouched, forgetting not advanced). Innovation gating as in
/// Kalman-filter practice (Bar-Shalom, Li & Kirubarajan 2001). Not for BatchQr.
struct OutlierOptions {
  bool enabled = false;
  /// c: reject |z| > c. 3 rejects 0.27 % of Gaussian samples (two-sided normal tail;
  /// Abramowitz & Stegun 1964, table 26.1).
  double threshold = 3.0;
  /// > 0: also reject a sample whose regressors have leverage h_x above this (a bad input
  /// tag gives a small error but a large leverage). 0 disables it.
  double leverageLimit = 0.0;
  /// Determined samples used to start the scale s (mean of q) before the gate acts.
  int warmup = 20;
  /// Memory, in samples, of the robust scale recursion s^2 <- a s^2 + (1 - a) min(q, c^2 s^2).
  double scaleMemory = 100.0;
  /// After this many consecutive rejections the next outlier is taken as a real change: it is
  /// accepted, s^2 restarts at its q and the information is relaxed by lockoutRelax.
  int lockoutLimit = 10;
  double lockoutRelax = 0.1;
  /// Huber weighting of accepted samples: w <- w min(1, huberThreshold/|z|) (Huber 1964;
  /// 1.345 gives 95 % efficiency at the Gaussian).
  bool huber = false;
  double huberThreshold = 1.345;
};

/// Options every estimator understands.
struct FitOptions {
  Intercept intercept = Intercept::fit;
  /// Forgetting factor lambda in (0, 1]; 1 = ordinary (growing-memory) least squares.
  /// Memory T0 = 1/(1 - lambda) samples.
  double forgetting = 1.0;
  /// VIF above which `Flag::collinear` is raised (10 = common practice, Marquardt 1970).
  double vifLimit = 10.0;
  WindupOptions windup;
  OutlierOptions outliers;
};

/// Checks the shared options; estimators call this from their constructors.
inline Status validate(const FitOptions& o) noexcept {
  if (!(o.forgetting > 0.0 && o.forgetting <= 1.0)) return Status::invalid_options;
  if (!(o.vifLimit >= 1.0) || !std::isfinite(o.vifLimit)) return Status::invalid_options;
  if (o.intercept != Intercept::fit && o.intercept != Intercept::none) return Status::invalid_options;
  const WindupOptions& g = o.windup;
  const auto nonNegative = [](double v) { return v >= 0.0 && std::isfinite(v); };
  if (!nonNegative(g.informationGate) || !(g.spreadFloor >= 0.0 && g.spreadFloor < 1.0) ||
      !nonNegative(g.regularization) || !(g.minForgetting > 0.0 && g.minForgetting <= 1.0) ||
      !nonNegative(g.changeThreshold) || !nonNegative(g.changeDrift) || !(g.changeRelax > 0.0 && g.changeRelax <= 1.0))
    return Status::invalid_options;
  const OutlierOptions& q = o.outliers;
  if (!(q.threshold > 0.0 && std::isfinite(q.threshold)) || !nonNegative(q.leverageLimit) || q.warmup < 1 ||
      !(q.scaleMemory >= 1.0 && std::isfinite(q.scaleMemory)) || q.lockoutLimit < 1 ||
      !(q.lockoutRelax > 0.0 && q.lockoutRelax <= 1.0) || !(q.huberThreshold > 0.0 && std::isfinite(q.huberThreshold)))
    return Status::invalid_options;
  return Status::ok;
}

}  // namespace rowfold
