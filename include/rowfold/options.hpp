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

/// Options every estimator understands. Plain values: copied into the estimator at
/// construction and checked there by `validate` (the result is the estimator's `status()`).
/// They are also written into snapshot images; `restore` accepts only an image written with
/// the same options.
struct FitOptions {
  /// Intercept mode (default: fitted, by online centering; see `Intercept`).
  Intercept intercept = Intercept::fit;
  /// Forgetting factor lambda in (0, 1]; 1 = ordinary (growing-memory) least squares.
  /// Memory T0 = 1/(1 - lambda) samples.
  double forgetting = 1.0;
  /// VIF above which `Flag::collinear` is raised (10 = common practice, Marquardt 1970).
  double vifLimit = 10.0;
};

/// Checks the shared options; estimators call this from their constructors.
/// Returns `invalid_options` unless 0 < forgetting <= 1, 1 <= vifLimit < inf and `intercept`
/// is one of the enumerators; otherwise `ok`. O(1).
inline Status validate(const FitOptions& o) noexcept {
  if (!(o.forgetting > 0.0 && o.forgetting <= 1.0)) return Status::invalid_options;
  if (!(o.vifLimit >= 1.0) || !std::isfinite(o.vifLimit)) return Status::invalid_options;
  if (o.intercept != Intercept::fit && o.intercept != Intercept::none) return Status::invalid_options;
  return Status::ok;
}

}  // namespace rowfold
