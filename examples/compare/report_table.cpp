// The console comparison table.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "flag_text.hpp"
#include "report.hpp"

namespace rowfold_compare {
namespace {

constexpr std::size_t kCell = 24;

std::string fmt(const char* format, double v) {
  if (std::isnan(v)) return "-";
  char buf[64];
  std::snprintf(buf, sizeof buf, format, v);
  return buf;
}

std::string label(const std::string& name, int width) {
  if (static_cast<int>(name.size()) <= width - 2) return name;
  return name.substr(0, static_cast<std::size_t>(width - 5)) + "...";
}

/// A label, then the cells in columns of kCell characters; no trailing blanks.
void printRow(std::FILE* out, int width, const std::string& name, const std::vector<std::string>& cells) {
  std::string row = label(name, width);
  row.resize(static_cast<std::size_t>(width), ' ');
  for (const std::string& cell : cells) row += cell + std::string(cell.size() < kCell ? kCell - cell.size() : 1, ' ');
  row.erase(row.find_last_not_of(' ') + 1);
  std::fprintf(out, "%s\n", row.c_str());
}

/// One table line: a label and one cell per solver ("-" for a solver without a result).
template <typename F>
void line(std::FILE* out, const Comparison& c, int width, const std::string& name, F cellText) {
  std::vector<std::string> cells;
  for (const SolverOutcome& o : c.solvers) cells.push_back(o.status == rowfold::Status::ok ? cellText(o) : "-");
  printRow(out, width, name, cells);
}

void printWarnings(std::FILE* out, const Comparison& c) {
  bool any = false;
  for (const SolverOutcome& o : c.solvers) {
    const char* name = solverName(o.kind);
    if (o.refused > 0) {
      std::fprintf(out, "  %s: %s (%llu rows not seen)\n", name, statusSentence(o.refusal),
                   static_cast<unsigned long long>(o.refused));
      any = true;
    }
    if (o.status != rowfold::Status::ok) {
      std::fprintf(out, "  %s: %s\n", name, statusSentence(o.status));
      any = true;
    }
    for (rowfold::Flag f : rowfold::kAllFlags)
      if (o.summary.flags.has(f)) {
        std::fprintf(out, "  %s [%s]: %s\n", name, rowfold::nameOf(f), flagSentence(f));
        any = true;
      }
  }
  if (!any) std::fprintf(out, "  none: every solver's fit looks numerically sound.\n");
}

}  // namespace

void printTable(std::FILE* out, const Comparison& c) {
  const auto terms = c.terms();
  int width = 27;
  for (const std::string& t : terms) width = std::max(width, std::min(40, static_cast<int>(t.size()) + 2));

  std::fprintf(out, "rowfold-compare: %s\n", c.file.c_str());
  std::fprintf(out, "response \"%s\"; inputs", c.response.c_str());
  for (std::size_t j = 0; j < c.inputs.size(); ++j)
    std::fprintf(out, "%s \"%s\"", j == 0 ? "" : ",", c.inputs[j].c_str());
  std::fprintf(out, "; %s; forgetting factor %g; weights %s\n", c.intercept ? "intercept fitted" : "no intercept",
               c.forgetting, c.weights.empty() ? "none (all 1)" : ("\"" + c.weights + "\"").c_str());
  std::fprintf(out, "rows: %llu data lines, %llu used, %llu skipped with a missing value",
               static_cast<unsigned long long>(c.rows.dataLines), static_cast<unsigned long long>(c.rows.used),
               static_cast<unsigned long long>(c.rows.skipped));
  if (c.rows.skipped > 0)
    std::fprintf(out, " (first at line %llu)", static_cast<unsigned long long>(c.rows.firstSkippedLine));
  if (c.window > 0)
    std::fprintf(out,
                 "\nwindow: the most recent rows only; BatchQr the last %lld, the others a block window of %lld blocks "
                 "of %lld rows (%lld to %lld rows)",
                 static_cast<long long>(c.windowBlocks * c.windowBlockRows), static_cast<long long>(c.windowBlocks),
                 static_cast<long long>(c.windowBlockRows), static_cast<long long>(c.windowBlocks * c.windowBlockRows),
                 static_cast<long long>((c.windowBlocks + 1) * c.windowBlockRows - 1));
  std::fprintf(out, "\nreference: GivensQr<long double>%s on the same rows, %d-bit significand%s\n\n",
               c.window > 0 ? " in the same block window" : "", c.referenceBits,
               c.referenceOk ? "" : " (no reference fit)");

  std::vector<std::string> names;
  for (const SolverOutcome& o : c.solvers) names.emplace_back(solverName(o.kind));
  printRow(out, width, "estimate (std. error)", names);
  for (std::size_t t = 0; t < terms.size(); ++t)
    line(out, c, width, terms[t], [&](const SolverOutcome& o) {
      const TermValues v = termValues(o.summary, c.intercept, t);
      return fmt("%.7g", v.estimate) + " (" + fmt("%.3g", v.standardError) + ")";
    });
  std::fprintf(out, "\n");
  line(out, c, width, "residual SE",
       [](const SolverOutcome& o) { return fmt("%.6g", o.summary.residualStandardError); });
  line(out, c, width, "R^2", [](const SolverOutcome& o) { return fmt("%.6f", o.summary.rSquared); });
  line(out, c, width, "rows folded", [](const SolverOutcome& o) { return std::to_string(o.folded); });
  line(out, c, width, "rows in the fit", [](const SolverOutcome& o) { return std::to_string(o.summary.count); });
  line(out, c, width, "ns/sample", [](const SolverOutcome& o) { return fmt("%.1f", o.nsPerSample); });
  line(out, c, width, "deviation from reference", [](const SolverOutcome& o) { return fmt("%.2e", o.maxDeviation); });
  std::fprintf(out, "\nestimated correct digits\n");
  for (std::size_t t = 0; t < terms.size(); ++t)
    line(out, c, width, terms[t],
         [&](const SolverOutcome& o) { return fmt("%.1f", termValues(o.summary, c.intercept, t).digits); });

  std::fprintf(out, "\nwarnings:\n");
  printWarnings(out, c);
  std::fprintf(out,
               "\nnotes: intervals at level %g. deviation = largest relative difference of a coefficient from the\n"
               "reference. ns/sample = time in add() only (BatchQr only stores the row there; its QR runs at\n"
               "solve time); it varies from run to run.\n",
               c.level);
}

}  // namespace rowfold_compare
