/// @file
/// The outcome of one run: what was read, and per solver its summary, timing and deviation from
/// the reference. Filled by run.cpp, printed by report_table.cpp, saved by report_json.cpp.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "contender.hpp"

namespace rowfold_compare {

/// Rows of the file as the reader saw them.
struct RowCounts {
  std::uint64_t dataLines = 0;  ///< non-blank lines after the header
  std::uint64_t used = 0;       ///< rows given to the solvers
  std::uint64_t skipped = 0;    ///< rows with a missing value in a chosen column
  std::uint64_t firstSkippedLine = 0;
};

struct SolverOutcome {
  SolverKind kind = SolverKind::givens_qr;
  rowfold::Status status = rowfold::Status::empty;  ///< of summarize()
  Summary summary;
  std::uint64_t folded = 0, refused = 0;
  rowfold::Status refusal = rowfold::Status::ok;  ///< why rows were refused (capacity_full)
  double nsPerSample = 0.0;
  /// |b - b_ref| / |b_ref| per term (intercept first when fitted); empty when not comparable.
  std::vector<double> deviation;
  double maxDeviation = 0.0;
};

struct Comparison {
  std::string file, response, weights;  ///< names as in the header (weights empty: none)
  std::vector<std::string> inputs;
  bool intercept = true;
  double forgetting = 1.0, level = 0.95;
  std::int64_t window = 0, windowBlocks = 0, windowBlockRows = 0;  ///< --window (0: none), B, b
  RowCounts rows;
  bool referenceOk = false;
  int referenceBits = 0;
  std::vector<double> reference;  ///< reference coefficients per term (intercept first when fitted)
  std::vector<SolverOutcome> solvers;

  /// Term names: "intercept" (when fitted), then the inputs.
  std::vector<std::string> terms() const {
    std::vector<std::string> t;
    if (intercept) t.emplace_back("intercept");
    t.insert(t.end(), inputs.begin(), inputs.end());
    return t;
  }
};

/// Estimate, standard error, interval and correct digits of term `t` (intercept first when fitted).
struct TermValues {
  double estimate, standardError, lower, upper, digits;
};
inline TermValues termValues(const Summary& s, bool intercept, std::size_t t) {
  if (intercept && t == 0)
    return {s.intercept, s.interceptStandardError, s.interceptLower, s.interceptUpper, s.conditioning.interceptDigits};
  const Eigen::Index j = static_cast<Eigen::Index>(t - (intercept ? 1 : 0));
  return {s.coefficients(j), s.standardErrors(j), s.lower(j), s.upper(j), s.conditioning.digits(j)};
}

/// Summaries, timing and deviations of every contender after the last row.
void finishComparison(const std::vector<std::unique_ptr<Contender>>& contenders, const Reference& reference,
                      Comparison& out);

}  // namespace rowfold_compare
