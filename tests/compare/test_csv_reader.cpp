// Unit tests of the rowfold-compare CSV reader (examples/compare/csv_reader.hpp).
// Every CSV text below is INVENTED for the test. Expected values are the fields as written in
// the text (or the CSV quoting rules of RFC 4180, Shafranovich 2005, for quoted fields).
#include <doctest/doctest.h>

#include <sstream>
#include <string>
#include <vector>

#include "csv_reader.hpp"

namespace {

using rowfold_compare::CsvProblem;
using rowfold_compare::CsvReader;

/// All rows of `text` as strings (header first); stops at the first problem.
std::vector<std::vector<std::string>> readAll(const std::string& text, CsvProblem& problem, bool& ok,
                                              char separator = ',') {
  std::istringstream in(text);
  CsvReader r(in, separator);
  std::vector<std::vector<std::string>> rows;
  ok = r.readHeader(problem);
  if (!ok) return rows;
  rows.push_back(r.names());
  CsvReader::Next n;
  while ((n = r.nextRow(problem)) == CsvReader::Next::row) {
    std::vector<std::string> row;
    for (std::size_t j = 0; j < r.fields(); ++j) row.emplace_back(r.field(j));
    rows.push_back(row);
  }
  ok = n == CsvReader::Next::end;
  return rows;
}

}  // namespace

TEST_CASE("csv reader: quoting, trimming, BOM, CR/LF and blank lines") {
  CsvProblem p;
  bool ok = false;
  const auto rows = readAll(
      "\xEF\xBB\xBF"
      "time, \"TI-101, tray\" ,y\r\n"
      "t1, 1.5 ,\"2\"\r\n"
      "\r\n"
      "   \n"
      "\"a \"\"b\"\"\",,3",
      p, ok);
  REQUIRE(ok);
  REQUIRE(rows.size() == 3);
  CHECK(rows[0] == std::vector<std::string>{"time", "TI-101, tray", "y"});
  CHECK(rows[1] == std::vector<std::string>{"t1", "1.5", "2"});
  CHECK(rows[2] == std::vector<std::string>{"a \"b\"", "", "3"});
}

TEST_CASE("csv reader: other separators") {
  CsvProblem p;
  bool ok = false;
  const auto semi = readAll("a;b\n1,5;2\n", p, ok, ';');
  REQUIRE(ok);
  CHECK(semi[1] == std::vector<std::string>{"1,5", "2"});
  const auto tab = readAll("a\tb\n 1\t\n", p, ok, '\t');
  REQUIRE(ok);
  CHECK(tab[1] == std::vector<std::string>{"1", ""});
}

TEST_CASE("csv reader: every problem names its line and column") {
  struct Case {
    const char* text;
    std::uint64_t line;
    std::size_t column;
    const char* words;
  };
  const Case cases[] = {
      {"", 1, 1, "empty"},
      {"a,b\n1,2\n3\n", 3, 2, "ragged"},
      {"a,b\n1,2,3\n", 2, 3, "ragged"},
      {"a,b\n1,\"2\n", 2, 2, "unterminated quote"},
      {"a,\"b\"x\n", 1, 2, "after the closing quote"},
  };
  for (const Case& c : cases) {
    CAPTURE(c.text);
    CsvProblem p;
    bool ok = true;
    readAll(c.text, p, ok);
    CHECK_FALSE(ok);
    CHECK(p.line == c.line);
    CHECK(p.column == c.column);
    CHECK(p.what.find(c.words) != std::string::npos);
    CHECK(rowfold_compare::describe("f.csv", p)
              .find("f.csv, line " + std::to_string(c.line) + ", column " + std::to_string(c.column) + ": ") == 0);
  }
}

TEST_CASE("csv reader: a line beyond the limit is refused, not buffered") {
  std::string text = "a,b\n";
  text.append(CsvReader::kMaxLine + 10, '7');
  CsvProblem p;
  bool ok = true;
  readAll(text, p, ok);
  CHECK_FALSE(ok);
  CHECK(p.line == 2);
  CHECK(p.what.find("longer than") != std::string::npos);
}

TEST_CASE("csv reader: numbers and missing-value tokens") {
  double v = 0;
  std::string why;
  CHECK(rowfold_compare::parseNumber("-.5e-3", v, why));
  CHECK(v == -0.0005);
  CHECK(rowfold_compare::parseNumber("+12", v, why));
  CHECK(v == 12.0);
  for (const char* bad : {"1,5", "0x10", "1e999", "--1", "1.2.3", "e5", "12 kg", "-"}) {
    CAPTURE(bad);
    CHECK_FALSE(rowfold_compare::parseNumber(bad, v, why));
    CHECK_FALSE(why.empty());
  }
  for (const char* missing : {"", "NA", "n/a", "#N/A", "NaN", "-nan", "NULL", "Inf", "-inf", "+Infinity"}) {
    CAPTURE(missing);
    CHECK(rowfold_compare::isMissingToken(missing));
  }
  for (const char* present : {"0", "N", "nana", "Bad"}) {
    CAPTURE(present);
    CHECK_FALSE(rowfold_compare::isMissingToken(present));
  }
  CHECK(rowfold_compare::isMissingToken("bad", {"Bad", "Shutdown"}));
}

TEST_CASE("csv reader: columns by name or number") {
  const std::vector<std::string> names{"time", "2", "flow", "flow"};
  std::size_t j = 99;
  CsvProblem p;
  CHECK(rowfold_compare::findColumn(names, "time", "input", j, p));
  CHECK(j == 0);
  CHECK(rowfold_compare::findColumn(names, "2", "input", j, p));  // the name "2" wins over column 2
  CHECK(j == 1);
  CHECK(rowfold_compare::findColumn(names, "3", "input", j, p));
  CHECK(j == 2);
  CHECK_FALSE(rowfold_compare::findColumn(names, "flow", "input", j, p));  // ambiguous name
  CHECK(p.what.find("appears twice") != std::string::npos);
  CHECK_FALSE(rowfold_compare::findColumn(names, "5", "response", j, p));
  CHECK(p.what.find("missing column") != std::string::npos);
  CHECK_FALSE(rowfold_compare::findColumn(names, "feed", "response", j, p));
  CHECK(p.line == 1);
}
