/// @file
/// The two renderings of a Comparison: the console table and the JSON document.
#pragma once

#include <cstdio>
#include <ostream>

#include "comparison.hpp"

namespace rowfold_compare {

/// The comparison table with the warnings in plain sentences.
void printTable(std::FILE* out, const Comparison& c);

/// The full result as JSON (nlohmann-json), indented.
void writeJson(std::ostream& out, const Comparison& c);

}  // namespace rowfold_compare
