/// @file
/// One plain sentence per rowfold warning flag and per refusal, for the report and the JSON.
#pragma once

#include "rowfold/status.hpp"

namespace rowfold_compare {

inline const char* flagSentence(rowfold::Flag f) {
  switch (f) {
    case rowfold::Flag::none:
      return "No warning.";
    case rowfold::Flag::ill_conditioned:
      return "The inputs are badly conditioned, so the standard errors, VIFs and digit estimates have "
             "only a few correct digits.";
    case rowfold::Flag::near_singular:
      return "For this solver the inputs are singular to working precision, so some coefficient may "
             "have no correct digit at all.";
    case rowfold::Flag::collinear:
      return "Some inputs move together (a VIF is above 10), so their separate coefficients are "
             "poorly determined even if predictions look fine.";
    case rowfold::Flag::rank_deficient:
      return "The data do not pin down every coefficient; the undetermined ones were set to zero.";
    case rowfold::Flag::too_few_samples:
      return "There are no more (effective) rows than coefficients, so the statistics mean nothing yet.";
    case rowfold::Flag::lost_definiteness:
      return "The covariance-form state of ForgettingRls is no longer positive definite; trust "
             "GivensQr instead.";
    case rowfold::Flag::low_excitation:
      return "The latest rows brought almost no new information, so in some direction the fit rests "
             "on old rows.";
    case rowfold::Flag::windup_guarded:
      return "The windup guard held forgetting back during a quiet stretch of the data.";
  }
  return "Unknown warning.";
}

/// Why a solver stopped taking rows or has no result.
inline const char* statusSentence(rowfold::Status s) {
  switch (s) {
    case rowfold::Status::capacity_full:
      return "Its row store was full (--capacity), so it did not see the rest of the file.";
    case rowfold::Status::empty:
      return "No row reached it, so there is nothing to report.";
    case rowfold::Status::not_available:
      return "It could not form a fit from these rows (its factor is unusable).";
    case rowfold::Status::invalid_options:
      return "It refused the options it was given.";
    default:
      return rowfold::nameOf(s);
  }
}

}  // namespace rowfold_compare
