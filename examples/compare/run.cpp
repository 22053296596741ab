// Reads the CSV file once and folds every usable row into each solver and the reference.
#include "run.hpp"

#include <sys/stat.h>

#include <cerrno>
#include <cmath>
#include <cstring>
#include <fstream>
#include <iostream>
#include <new>
#include <stdexcept>

#include "csv_reader.hpp"
#include "progress.hpp"

namespace rowfold_compare {
namespace {

constexpr Eigen::Index kBlockRows = 256;

/// The chosen columns of the file (0-based field numbers).
struct Columns {
  std::size_t response = 0;
  std::vector<std::size_t> inputs;
  bool weighted = false;
  std::size_t weights = 0;
};

[[noreturn]] void fail(const std::string& file, const CsvProblem& p) {
  throw std::runtime_error(describe(file, p));
}

std::size_t resolve(const CsvReader& r, const std::string& file, const std::string& token, const char* role) {
  std::size_t index = 0;
  CsvProblem p;
  if (!findColumn(r.names(), token, role, index, p)) fail(file, p);
  return index;
}

Columns chooseColumns(const CsvReader& r, const std::string& file, const Settings& s) {
  Columns c;
  c.response = resolve(r, file, s.response, "response");
  std::vector<std::size_t> used{c.response};
  auto unique = [&](std::size_t j, const char* role) {
    for (std::size_t u : used)
      if (u == j)
        fail(file,
             {1, j + 1,
              std::string("column ") + quoteForMessage(r.names()[j]) + " is chosen twice (again as " + role + ")"});
    used.push_back(j);
  };
  for (const std::string& t : s.inputs) {
    const std::size_t j = resolve(r, file, t, "input");
    unique(j, "input");
    c.inputs.push_back(j);
  }
  if (!s.weights.empty()) {
    c.weighted = true;
    c.weights = resolve(r, file, s.weights, "weights");
    unique(c.weights, "weights");
  }
  return c;
}

/// Parses the chosen fields of the current row into (x, y, w). Returns false for a row with a
/// missing value (when such rows are skipped); throws on a bad number or weight.
class RowParser {
 public:
  RowParser(const CsvReader& r, std::string file, const Columns& c, const Settings& s)
      : m_reader(r), m_file(std::move(file)), m_columns(c), m_settings(s) {}

  bool parse(Eigen::Ref<Eigen::VectorXd> x, double& y, double& w) {
    bool missing = false;
    missing |= !value(m_columns.response, "response", y);
    for (std::size_t j = 0; j < m_columns.inputs.size(); ++j) {
      double v = 0;
      missing |= !value(m_columns.inputs[j], "input", v);
      x(static_cast<Eigen::Index>(j)) = v;
    }
    w = 1.0;
    if (m_columns.weighted) {
      missing |= !value(m_columns.weights, "weights", w);
      if (!missing && !(w >= 0.0))
        fail(m_file, {m_reader.line(), m_columns.weights + 1,
                      "negative weight " + quoteForMessage(m_reader.field(m_columns.weights)) +
                          " in the weights column " + quoteForMessage(m_reader.names()[m_columns.weights])});
    }
    return !missing;
  }

 private:
  bool value(std::size_t j, const char* role, double& out) {
    const std::string_view text = m_reader.field(j);
    const auto where = [&] {
      return std::string(" in the ") + role + " column " + quoteForMessage(m_reader.names()[j]);
    };
    if (isMissingToken(text, m_settings.missingWords)) {
      if (m_settings.stopOnMissing)
        fail(m_file,
             {m_reader.line(), j + 1, "missing value " + quoteForMessage(text) + where() + " (--on-missing stop)"});
      return false;
    }
    if (!parseNumber(text, out, m_why)) fail(m_file, {m_reader.line(), j + 1, m_why + where()});
    return true;
  }

  const CsvReader& m_reader;
  std::string m_file;
  const Columns& m_columns;
  const Settings& m_settings;
  std::string m_why;
};

/// Folds the block into every solver and the reference. At a trace point the last row is
/// predicted by each traced solver before it is folded (the one-step prediction error).
void foldBlock(Block& b, std::vector<std::unique_ptr<Contender>>& contenders, Reference& reference,
               TraceRecorder* trace, bool tracePoint, std::uint64_t used) {
  if (b.rows == 0) return;
  const Eigen::Index last = b.rows - 1;
  std::size_t traced = 0;
  for (auto& c : contenders) {
    if (trace != nullptr && tracePoint && c->kind() != SolverKind::batch_qr) {
      c->fold(b, 0, last);
      const double error = b.y(last) - c->predict(b.x.row(last).transpose());
      c->fold(b, last, b.rows);
      trace->record(traced++, *c, used, error);
    } else {
      c->fold(b, 0, b.rows);
    }
  }
  reference.fold(b);
  b.rows = 0;
}

std::uint64_t fileSize(const std::string& path) {
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0) return 0;
  if (S_ISDIR(st.st_mode)) throw std::runtime_error(path + " is a directory, not a CSV file");
  return S_ISREG(st.st_mode) ? static_cast<std::uint64_t>(st.st_size) : 0;
}

}  // namespace

Comparison run(const Settings& s, const std::function<TraceRecorder*(const Comparison&)>& startTrace) {
  const bool stdinFile = s.file == "-";
  const std::string file = stdinFile ? std::string("<standard input>") : s.file;
  std::ifstream in;
  const std::uint64_t size = stdinFile ? 0 : fileSize(s.file);
  if (!stdinFile) {
    in.open(s.file, std::ios::in | std::ios::binary);
    if (!in) throw std::runtime_error("cannot open " + s.file + ": " + std::strerror(errno));
  }
  CsvReader reader(stdinFile ? std::cin : in, s.separator);
  CsvProblem problem;
  if (!reader.readHeader(problem)) fail(file, problem);
  const Columns columns = chooseColumns(reader, file, s);

  Comparison out;
  out.file = file;
  out.response = reader.names()[columns.response];
  for (std::size_t j : columns.inputs) out.inputs.push_back(reader.names()[j]);
  if (columns.weighted) out.weights = reader.names()[columns.weights];
  out.intercept = s.intercept;
  out.forgetting = s.forgetting;
  out.level = s.level;
  if (s.window > 0) {
    out.window = s.window;
    out.windowBlocks = s.windowBlocks;
    out.windowBlockRows = windowBlockRows(s);
  }

  const auto k = static_cast<Eigen::Index>(columns.inputs.size());
  std::vector<std::unique_ptr<Contender>> contenders;
  for (SolverKind kind : s.solvers) {
    try {
      contenders.push_back(makeContender(kind, k, s));
    } catch (const std::bad_alloc&) {
      throw std::runtime_error(std::string("not enough memory for ") + solverName(kind) +
                               " (BatchQr stores --capacity or --window rows; choose fewer)");
    }
    if (contenders.back()->status() != rowfold::Status::ok)
      throw std::runtime_error(std::string(solverName(kind)) +
                               " refused its options: " + rowfold::nameOf(contenders.back()->status()));
  }
  Reference reference(k, s);
  TraceRecorder* trace = startTrace(out);

  Block block(kBlockRows, k);
  RowParser parser(reader, file, columns, s);
  Progress progress(s.progress, size);
  RowCounts& rows = out.rows;
  CsvReader::Next next;
  while ((next = reader.nextRow(problem)) == CsvReader::Next::row) {
    ++rows.dataLines;
    const Eigen::Index i = block.rows;
    if (!parser.parse(block.x.row(i).transpose(), block.y(i), block.w(i))) {
      if (rows.skipped++ == 0) rows.firstSkippedLine = reader.line();
      continue;
    }
    ++block.rows;
    ++rows.used;
    const bool tracePoint = trace != nullptr && rows.used % s.every == 0;
    if (block.full() || tracePoint) foldBlock(block, contenders, reference, trace, tracePoint, rows.used);
    progress.update(reader.bytesRead(), rows.dataLines);
  }
  progress.done();
  if (next == CsvReader::Next::problem) fail(file, problem);
  if (!stdinFile && in.bad()) throw std::runtime_error("reading " + s.file + " failed: " + std::strerror(errno));
  foldBlock(block, contenders, reference, trace, false, rows.used);
  if (rows.dataLines == 0) fail(file, {reader.line() + 1, 1, "no data rows after the header line"});
  if (rows.used == 0)
    fail(file, {rows.firstSkippedLine, 1,
                "no usable row: every one of the " + std::to_string(rows.dataLines) +
                    " data rows has a missing value in a chosen column (the first is this line)"});
  finishComparison(contenders, reference, out);
  return out;
}

}  // namespace rowfold_compare
