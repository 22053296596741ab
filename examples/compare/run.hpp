/// @file
/// One pass over the CSV file: every usable row is folded into each chosen solver and into the
/// reference. Problems with the file throw std::runtime_error naming file, line and column.
#pragma once

#include <functional>

#include "comparison.hpp"
#include "settings.hpp"
#include "trace.hpp"

namespace rowfold_compare {

/// `startTrace` is called once the header is known (with the file, column names and options
/// filled in) and returns the recorder to feed, or nullptr for no trace.
Comparison run(const Settings& settings, const std::function<TraceRecorder*(const Comparison&)>& startTrace);

}  // namespace rowfold_compare
