// rowfold-compare: compares the rowfold solvers on a CSV file (see --help and the README).
#include <cstdio>
#include <exception>
#include <iostream>
#include <memory>

#include "output_file.hpp"
#include "report.hpp"
#include "run.hpp"
#include "settings.hpp"

int main(int argc, char** argv) {
  using namespace rowfold_compare;
  std::ios::sync_with_stdio(false);  // standard input is read through std::cin's buffer only
  Settings settings;
  const int status = parseCommandLine(argc, argv, settings);
  if (status >= 0) return status;
  try {
    std::unique_ptr<TraceRecorder> trace;
    bool onlyBatch = true;
    for (SolverKind k : settings.solvers) onlyBatch = onlyBatch && k == SolverKind::batch_qr;
    const bool tracing = !settings.traceFile.empty() || !settings.plotFile.empty();
    if (tracing && onlyBatch)
      throw std::runtime_error("--trace and --plot need an online solver (GivensQr, NormalEquations or ForgettingRls)");
    const Comparison result = run(settings, [&](const Comparison& c) -> TraceRecorder* {
      if (!tracing) return nullptr;
      trace = std::make_unique<TraceRecorder>(settings, c.terms(),
                                              "rowfold-compare: " + c.file + ", response " + c.response);
      return trace.get();
    });
    std::unique_ptr<OutputFile> json;
    if (!settings.jsonFile.empty()) {
      json = std::make_unique<OutputFile>(settings.jsonFile);
      writeJson(json->stream(), result);
    }
    if (trace) trace->commit();
    if (json) json->commit();
    printTable(stdout, result);
    return 0;
  } catch (const std::exception& e) {
    std::fflush(stdout);
    std::fprintf(stderr, "rowfold-compare: error: %s\n", e.what());
    return 1;
  }
}
