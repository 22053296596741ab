/// @file
/// Status values and warning flags shared by every rowfold estimator.
#pragma once

#include <cstdint>

namespace rowfold {

/// Outcome of a call that folds samples or validates options.
/// `ok` is 0; every reject reason has its own value. A call that returns anything
/// other than `ok` has left the estimator state exactly as it was.
///
/// Which call returns which value (details at each member function of EstimatorBase):
/// - `nonfinite_input`, `negative_weight`: `add`, `addDelayed`, `addRows`, GivensQr::remove
///   (`nonfinite_input` also `setNominal`).
/// - `wrong_size`: `status()` (k does not match K), `add`, `addDelayed`, `addRows`,
///   `predictionInterval`, `restore`, `setNominal`, GivensQr::remove.
/// - `capacity_full`: `add`, `addRows`, `merge` (BatchQr full).
/// - `invalid_options`: `validate`, `status()` (also: the outlier gate enabled for BatchQr),
///   `relax` (factor outside (0, 1]), and the calls that check the status first (`add`,
///   `addRows`, `restore`, `merge`, `advance`, ...).
/// - `empty`, `not_available`: the queries `solveInto`, `summarizeInto`, `conditioningInto`,
///   `predictionInterval`, `crossProducts`, `covariance`, `correlation` (`not_available` when the
///   state gives no finite factor; the flags say why).
/// - `buffer_too_small`: `snapshot`. `corrupt_image`, `image_mismatch`: `restore`.
/// - `state_mismatch`: `merge`; `not_available` also from `merge` (ForgettingRls) and from
///   `addDelayed`/`advance` (BatchQr under forgetting).
/// - `outlier`: `add`, `addDelayed` (and BlockWindow::add) when the outlier gate refuses the
///   sample; `addRows` skips such rows instead.
/// - `not_definite`: GivensQr::remove (the downdate would leave an indefinite factor).
/// - `invalid_argument`: `summarizeInto`, `predictionInterval` (confidence level not in (0, 1)).
/// addRowsParallel returns what addRows and merge return.
enum class Status : std::uint8_t {
  ok = 0,
  nonfinite_input,  ///< x or y holds NaN or Inf
  negative_weight,  ///< weight < 0 (or NaN/Inf weight)
  wrong_size,       ///< x has a different length than the estimator's K
  capacity_full,    ///< a fixed-capacity estimator (BatchQr) has no room left
  invalid_options,  ///< the options given at construction were rejected
  empty,            ///< nothing to solve yet (no sample folded)
  not_available,    ///< the requested quantity cannot be formed (e.g. factor lost definiteness)
  buffer_too_small,  ///< snapshot: the caller's buffer cannot hold the image
  corrupt_image,     ///< restore: truncated image, bad magic or checksum mismatch
  image_mismatch,    ///< restore: valid image of another estimator, Scalar, K, version or options
  outlier,           ///< the outlier gate refused the sample (innovation or leverage too large)
  not_definite,      ///< removing a sample (downdate) would leave a factor that is not positive definite
  state_mismatch,    ///< merge: the other state has another K, intercept mode or options
  invalid_argument   ///< a query's argument is outside its domain (confidence level not in (0, 1))
};

/// Short, stable, allocation-free name of a status (for logs and reports).
constexpr const char* nameOf(Status s) noexcept {
  switch (s) {
    case Status::ok: return "ok";
    case Status::nonfinite_input: return "nonfinite_input";
    case Status::negative_weight: return "negative_weight";
    case Status::wrong_size: return "wrong_size";
    case Status::capacity_full: return "capacity_full";
    case Status::invalid_options: return "invalid_options";
    case Status::empty: return "empty";
    case Status::not_available: return "not_available";
    case Status::buffer_too_small: return "buffer_too_small";
    case Status::corrupt_image: return "corrupt_image";
    case Status::image_mismatch: return "image_mismatch";
    case Status::outlier: return "outlier";
    case Status::not_definite: return "not_definite";
    case Status::state_mismatch: return "state_mismatch";
    case Status::invalid_argument: return "invalid_argument";
  }
  return "unknown";
}

/// Warning flags (a bit set). A flag says how far a fit can be trusted; it never
/// stops the estimator from returning a defined answer.
///
/// Where each flag is raised: `rank_deficient` and `too_few_samples` by every query
/// (`solveInto`, `summarizeInto`, `predictionInterval`; `conditioningInto` sets `rank_deficient`);
/// `ill_conditioned`, `near_singular` and `collinear` by the conditioning analysis
/// (`conditioningInto`, `summarizeInto`), `near_singular` also with `not_available` when the factor
/// is not finite; `lost_definiteness` by ForgettingRls only. `low_excitation` and
/// `windup_guarded` describe the last sample the windup guard saw (held forgetting; folded an
/// information-floor row) and appear in `solveInto`, `summarizeInto` and `conditioningInto`.
enum class Flag : std::uint16_t {
  none = 0,
  ill_conditioned = 1u << 0,   ///< scaled condition beyond u^-1/2: covariances/VIFs lose all digits
  near_singular = 1u << 1,     ///< singular to working precision for this estimator and Scalar
  collinear = 1u << 2,         ///< a VIF above the threshold (10 = common practice)
  rank_deficient = 1u << 3,    ///< numerical rank < K; dependent coefficients set to zero
  too_few_samples = 1u << 4,   ///< effective sample size <= number of coefficients
  lost_definiteness = 1u << 5,  ///< a covariance-form state (P) is no longer positive definite
  low_excitation = 1u << 6,     ///< recent samples carried (almost) no new information: the
                                ///< estimate rests on old data in some direction
  windup_guarded = 1u << 7      ///< the windup guard held forgetting back (or bounded the factor)
};

/// A set of `Flag`s (16 bits; trivially copyable, constexpr, allocation-free).
class Flags {
 public:
  /// The empty set.
  constexpr Flags() noexcept = default;
  /// The set holding `f` alone (implicit, so a Flag converts to Flags).
  constexpr Flags(Flag f) noexcept : m_bits(static_cast<std::uint16_t>(f)) {}  // NOLINT implicit by design
  /// True if `f` is in the set.
  constexpr bool has(Flag f) const noexcept { return (m_bits & static_cast<std::uint16_t>(f)) != 0; }
  /// True if any flag is set.
  constexpr bool any() const noexcept { return m_bits != 0; }
  /// Adds `f`.
  constexpr void set(Flag f) noexcept { m_bits = static_cast<std::uint16_t>(m_bits | static_cast<std::uint16_t>(f)); }
  /// Adds every flag of `f`.
  constexpr void set(Flags f) noexcept { m_bits = static_cast<std::uint16_t>(m_bits | f.m_bits); }
  /// The raw bit pattern (bit i = the Flag with value 1 << i), for logs and images.
  constexpr std::uint16_t bits() const noexcept { return m_bits; }
  /// Same set of flags.
  friend constexpr bool operator==(Flags a, Flags b) noexcept { return a.m_bits == b.m_bits; }
  /// Different sets of flags.
  friend constexpr bool operator!=(Flags a, Flags b) noexcept { return a.m_bits != b.m_bits; }

 private:
  std::uint16_t m_bits = 0;
};

/// Stable name of one flag.
constexpr const char* nameOf(Flag f) noexcept {
  switch (f) {
    case Flag::none: return "none";
    case Flag::ill_conditioned: return "ill_conditioned";
    case Flag::near_singular: return "near_singular";
    case Flag::collinear: return "collinear";
    case Flag::rank_deficient: return "rank_deficient";
    case Flag::too_few_samples: return "too_few_samples";
    case Flag::lost_definiteness: return "lost_definiteness";
    case Flag::low_excitation: return "low_excitation";
    case Flag::windup_guarded: return "windup_guarded";
  }
  return "unknown";
}

/// Every flag, for iteration in reports.
constexpr Flag kAllFlags[] = {Flag::ill_conditioned, Flag::near_singular,     Flag::collinear,
                              Flag::rank_deficient,  Flag::too_few_samples,   Flag::lost_definiteness,
                              Flag::low_excitation,  Flag::windup_guarded};

}  // namespace rowfold
