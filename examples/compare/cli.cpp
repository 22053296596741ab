// Command line of rowfold-compare (CLI11).
#include <CLI/CLI.hpp>

#include <algorithm>
#include <cctype>
#include <string>

#include "settings.hpp"

namespace rowfold_compare {
namespace {

const char* const kDescription =
    "rowfold-compare: fits one linear model to a CSV file with several rowfold solvers and compares\n"
    "them side by side (coefficients with standard errors, estimated correct digits, residual SE,\n"
    "R^2, warnings, ns/sample and the largest deviation from an extended-precision reference).\n"
    "\n"
    "The file is read line by line in constant memory, so it may be of any size. The first line\n"
    "holds the column names. Columns are chosen by name or by 1-based number (a name in the header\n"
    "wins over a number). Fields may be quoted with double quotes; numbers use '.' as the decimal\n"
    "point. Blank lines are skipped.\n"
    "\n"
    "Missing values: an empty field, NA, N/A, #N/A, NaN, null, Inf or Infinity (any case) in a\n"
    "chosen column makes the row 'missing'. Such rows are skipped and counted, or, with\n"
    "--on-missing stop, stop the run with an error naming file, line and column. Any other\n"
    "non-number in a chosen column is an error; other columns are never parsed.\n"
    "\n"
    "Solvers: BatchQr (stores the rows; holds at most --capacity rows, the rest of the file is not\n"
    "seen by it and the report says so), GivensQr, NormalEquations, ForgettingRls, or all.\n"
    "\n"
    "Windows: --window N fits only the most recent rows. GivensQr, NormalEquations, ForgettingRls\n"
    "and the reference use rowfold::BlockWindow: B = --window-blocks blocks of b = ceil(N/B) rows,\n"
    "W = B*b; they hold the last W + (rows mod b) rows. BatchQr becomes a ring of exactly the last W\n"
    "rows (--capacity is then ignored), so it holds the same rows as the others only when the row\n"
    "count is a multiple of b; otherwise its deviation is not reported.\n"
    "\n"
    "Reference: GivensQr<long double> (backward stable; 64-bit significand on x86-64) is fed the same\n"
    "rows in the same pass, so memory stays constant. 'deviation' is the largest relative difference\n"
    "of a solver's coefficients (and intercept) from it. Where long double is the same as double,\n"
    "the reference is no more precise than GivensQr; the report prints the reference precision.\n"
    "\n"
    "ns/sample is measured with a steady clock around the calls that fold rows only; it varies from\n"
    "run to run. --trace and --plot record the online solvers only (BatchQr would refactor every\n"
    "stored row at each point). Output files are written under a temporary name and renamed when\n"
    "complete; on an error none is left behind.\n";

bool parseSolver(std::string word, std::vector<SolverKind>& out) {
  std::transform(word.begin(), word.end(), word.begin(), [](unsigned char c) { return std::tolower(c); });
  if (word == "all") {
    for (SolverKind k :
         {SolverKind::batch_qr, SolverKind::givens_qr, SolverKind::normal_equations, SolverKind::forgetting_rls})
      if (std::find(out.begin(), out.end(), k) == out.end()) out.push_back(k);
    return true;
  }
  SolverKind k;
  if (word == "batchqr" || word == "batch") {
    k = SolverKind::batch_qr;
  } else if (word == "givensqr" || word == "givens") {
    k = SolverKind::givens_qr;
  } else if (word == "normalequations" || word == "normal") {
    k = SolverKind::normal_equations;
  } else if (word == "forgettingrls" || word == "rls") {
    k = SolverKind::forgetting_rls;
  } else {
    return false;
  }
  if (std::find(out.begin(), out.end(), k) == out.end()) out.push_back(k);
  return true;
}

}  // namespace

int parseCommandLine(int argc, char** argv, Settings& s) {
  CLI::App app(kDescription, "rowfold-compare");
  app.get_formatter()->column_width(34);
  std::vector<std::string> solverWords;
  std::string separator = ",";
  std::string onMissing = "skip";

  app.add_option("file", s.file, "CSV file to read (- for standard input)")->required();
  app.add_option("-r,--response", s.response, "response column (name or number)")->required();
  app.add_option("-i,--inputs", s.inputs, "regressor columns, comma separated (names or numbers)")
      ->required()
      ->delimiter(',')
      ->allow_extra_args(false);
  app.add_option("-w,--weights", s.weights, "column of sample weights (>= 0); default: all rows weigh 1");
  app.add_flag(
      "--no-intercept", [&s](std::int64_t) { s.intercept = false; }, "fit through the origin");
  app.add_option("-s,--solver", solverWords,
                 "BatchQr, GivensQr, NormalEquations, ForgettingRls or all; comma separated or repeated")
      ->delimiter(',')
      ->allow_extra_args(false)
      ->default_str("all");
  app.add_option("-f,--forgetting", s.forgetting, "forgetting factor in (0, 1]; memory about 1/(1 - f) rows")
      ->check(CLI::Range(0.0, 1.0))
      ->capture_default_str();
  app.add_option("--level", s.level, "confidence level of the intervals, in (0, 1)")
      ->check(CLI::Range(0.0, 1.0))
      ->capture_default_str();
  app.add_option("--capacity", s.capacity, "most rows BatchQr stores (it keeps every row: about 16 (K + 3) bytes each)")
      ->check(CLI::Range(std::int64_t(1), std::int64_t(1) << 40))
      ->capture_default_str();
  app.add_option("--window", s.window, "fit only the most recent rows, about this many (see Windows above)")
      ->check(CLI::Range(std::int64_t(1), std::int64_t(1) << 40));
  app.add_option("--window-blocks", s.windowBlocks, "blocks of the block window (more: closer to exactly W rows)")
      ->check(CLI::Range(std::int64_t(1), std::int64_t(4096)))
      ->capture_default_str();
  app.add_option("--separator", separator, "field separator: one character, or 'tab'")->capture_default_str();
  app.add_option("--on-missing", onMissing, "skip: skip and count rows with a missing value; stop: error")
      ->check(CLI::IsMember({"skip", "stop"}))
      ->capture_default_str();
  app.add_option("--missing-words", s.missingWords, "more tokens that mean 'no value' (e.g. Bad,Shutdown)")
      ->delimiter(',')
      ->allow_extra_args(false);
  app.add_option("--json", s.jsonFile, "write the full result as JSON to this file");
  app.add_option("--trace", s.traceFile, "write coefficient trajectories (CSV) to this file");
  app.add_option("--plot", s.plotFile, "draw the trajectories and the prediction error as SVG to this file");
  app.add_option("--every", s.every, "rows between trace/plot points")
      ->check(CLI::Range(std::uint64_t(1), std::uint64_t(1) << 62))
      ->capture_default_str();
  app.add_flag(
      "--no-progress", [&s](std::int64_t) { s.progress = false; },
      "no progress line (it only appears when stderr is a terminal anyway)");

  try {
    app.parse(argc, argv);
    if (separator == "tab" || separator == "\\t") separator = "\t";
    if (separator.size() != 1 || separator == "\"" || separator == "\n" || separator == "\r")
      throw CLI::ValidationError("--separator", "must be one character other than a quote or a line end");
    s.separator = separator[0];
    s.stopOnMissing = onMissing == "stop";
    if (!(s.forgetting > 0.0)) throw CLI::ValidationError("--forgetting", "must be above 0");
    if (!(s.level > 0.0 && s.level < 1.0)) throw CLI::ValidationError("--level", "must be strictly between 0 and 1");
    if (solverWords.empty()) solverWords.push_back("all");
    for (const std::string& w : solverWords)
      if (!parseSolver(w, s.solvers))
        throw CLI::ValidationError(
            "--solver", "unknown solver '" + w + "' (BatchQr, GivensQr, NormalEquations, ForgettingRls, all)");
  } catch (const CLI::ParseError& e) {
    return app.exit(e);
  }
  return -1;
}

}  // namespace rowfold_compare
