// libFuzzer target: the CSV reader of rowfold-compare (examples/compare/csv_reader.hpp) on
// arbitrary bytes. It must never crash or hit undefined behaviour, and every problem it reports
// must name a line and a column inside the input (line <= lines in the input + 1, column >= 1).
// Byte 0 picks the separator, byte 1 which columns are chosen; the rest is the CSV text.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <sstream>
#include <string>
#include <vector>

#include "csv_reader.hpp"

namespace {

void require(bool ok) {
  if (!ok) std::abort();
}

void checkProblem(const rowfold_compare::CsvProblem& p, std::uint64_t maxLine) {
  require(p.line >= 1 && p.line <= maxLine);
  require(p.column >= 1);
  require(!p.what.empty());
  const std::string text = rowfold_compare::describe("f.csv", p);
  require(text.find("f.csv, line " + std::to_string(p.line) + ", column " + std::to_string(p.column) + ": ") == 0);
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size < 2) return 0;
  const char separators[] = {',', ';', '\t', '|'};
  const char separator = separators[data[0] % 4];
  const unsigned choice = data[1];
  const std::string text(reinterpret_cast<const char*>(data + 2), size - 2);
  std::uint64_t maxLine = 1;
  for (char c : text) maxLine += c == '\n' ? 1 : 0;

  std::istringstream in(text);
  rowfold_compare::CsvReader reader(in, separator);
  rowfold_compare::CsvProblem problem;
  if (!reader.readHeader(problem)) {
    checkProblem(problem, maxLine);
    return 0;
  }
  require(!reader.names().empty());
  // Choose up to four columns: by number (1-based, possibly out of range) or by the name found
  // in the header (exercises both lookups and their errors).
  std::vector<std::size_t> columns;
  const std::vector<std::string> extra{"bad", "--"};
  for (unsigned k = 0; k < 1 + (choice & 3u); ++k) {
    const unsigned pick = (choice >> (2 + k)) & 7u;
    const std::string token = (pick & 1u) != 0 ? reader.names()[pick % reader.names().size()] : std::to_string(pick);
    std::size_t index = 0;
    if (rowfold_compare::findColumn(reader.names(), token, "input", index, problem)) {
      require(index < reader.names().size());
      columns.push_back(index);
    } else {
      checkProblem(problem, maxLine);
    }
  }
  rowfold_compare::CsvReader::Next next;
  std::uint64_t lastLine = reader.line();
  while ((next = reader.nextRow(problem)) == rowfold_compare::CsvReader::Next::row) {
    require(reader.line() > lastLine && reader.line() <= maxLine);
    lastLine = reader.line();
    require(reader.fields() == reader.names().size());
    for (std::size_t j : columns) {
      const std::string_view field = reader.field(j);
      if (rowfold_compare::isMissingToken(field, extra)) continue;
      double value = 0;
      std::string why;
      if (rowfold_compare::parseNumber(field, value, why))
        require(std::isfinite(value));
      else
        require(!why.empty());
    }
  }
  if (next == rowfold_compare::CsvReader::Next::problem) checkProblem(problem, maxLine);
  require(reader.bytesRead() <= text.size());
  return 0;
}
