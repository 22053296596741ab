/// @file
/// What the user asked rowfold-compare to do (filled from the command line by cli.cpp).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace rowfold_compare {

enum class SolverKind { batch_qr, givens_qr, normal_equations, forgetting_rls };

/// Display name of a solver (the rowfold class name).
inline const char* solverName(SolverKind k) {
  switch (k) {
    case SolverKind::batch_qr:
      return "BatchQr";
    case SolverKind::givens_qr:
      return "GivensQr";
    case SolverKind::normal_equations:
      return "NormalEquations";
    case SolverKind::forgetting_rls:
      return "ForgettingRls";
  }
  return "unknown";
}

struct Settings {
  std::string file;                 ///< CSV file, "-" for standard input
  std::string response;             ///< column name or 1-based number
  std::vector<std::string> inputs;  ///< regressor columns
  std::string weights;              ///< weights column (empty: every row weight 1)
  bool intercept = true;
  std::vector<SolverKind> solvers;  ///< in the order they are reported
  double forgetting = 1.0;
  double level = 0.95;             ///< confidence level of the intervals
  std::int64_t capacity = 100000;  ///< rows BatchQr can hold
  std::int64_t window = 0;         ///< 0: all rows; else fit only the most recent rows
  std::int64_t windowBlocks = 8;   ///< B, blocks of the block window (GivensQr, ..., reference)
  char separator = ',';
  bool stopOnMissing = false;             ///< a missing value is an error instead of a skipped row
  std::vector<std::string> missingWords;  ///< extra tokens that mean "no value"
  std::string jsonFile, traceFile, plotFile;
  std::uint64_t every = 100;  ///< trace/plot point every this many used rows
  bool progress = true;
};

/// Rows per block of the block window, b = ceil(window / B); the window proper is W = B b rows.
inline std::int64_t windowBlockRows(const Settings& s) {
  return (s.window + s.windowBlocks - 1) / s.windowBlocks;
}

/// Parses the command line. Returns -1 when the tool should go on, otherwise the exit status
/// (0 after --help, non-zero after a usage error, which is already printed).
int parseCommandLine(int argc, char** argv, Settings& settings);

}  // namespace rowfold_compare
