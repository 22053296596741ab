/// @file
/// Streaming CSV reader of the rowfold-compare tool: one line in memory at a time.
///
/// Accepted format: a header line with column names, then data lines; fields separated by one
/// character (comma by default); a field may be quoted with double quotes ("" inside a quoted
/// field is one quote; a quoted field cannot span lines); spaces and tabs around a field are
/// ignored; CR/LF or LF line ends; a UTF-8 byte-order mark before the header is skipped; blank
/// lines are skipped. Numbers are decimal, with '.' as the decimal point and an optional exponent.
///
/// Missing values: an empty field and the tokens NA, N/A, #N/A, NaN, null, Inf and Infinity (any
/// case, the last three with an optional sign), plus any extra tokens the caller adds.
///
/// Every problem is reported as a CsvProblem naming the 1-based line and column (field) number.
/// The reader throws nothing itself (the fuzzer calls it directly); the tool turns problems into
/// error messages.
#pragma once

#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <istream>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace rowfold_compare {

/// Where and what: 1-based line and column (field) number, and a sentence.
struct CsvProblem {
  std::uint64_t line = 0;
  std::size_t column = 0;
  std::string what;
};

/// "FILE, line L, column C: what".
inline std::string describe(const std::string& file, const CsvProblem& p) {
  return file + ", line " + std::to_string(p.line) + ", column " + std::to_string(p.column) + ": " + p.what;
}

/// A field as it can be shown in a message: at most 40 characters, non-printable bytes as \xNN.
inline std::string quoteForMessage(std::string_view text) {
  static const char kHex[] = "0123456789ABCDEF";
  std::string out = "\"";
  for (std::size_t i = 0; i < text.size() && i < 40; ++i) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c >= 0x20 && c < 0x7F) {
      out += static_cast<char>(c);
    } else {
      out += "\\x";
      out += kHex[c >> 4];
      out += kHex[c & 0xF];
    }
  }
  if (text.size() > 40) out += "...";
  return out + "\"";
}

namespace detail {

inline char lower(char c) {
  return (c >= 'A' && c <= 'Z') ? static_cast<char>(c - 'A' + 'a') : c;
}

inline bool sameWord(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (lower(a[i]) != lower(b[i])) return false;
  return true;
}

}  // namespace detail

/// True for the tokens that mean "no value" (see the file comment), compared without case.
inline bool isMissingToken(std::string_view t, const std::vector<std::string>& extra = {}) {
  if (t.empty()) return true;
  for (const char* word : {"na", "n/a", "#n/a", "nan", "null"})
    if (detail::sameWord(t, word)) return true;
  std::string_view unsigned_ = (t[0] == '+' || t[0] == '-') ? t.substr(1) : t;
  if (detail::sameWord(unsigned_, "nan") || detail::sameWord(unsigned_, "inf") ||
      detail::sameWord(unsigned_, "infinity"))
    return true;
  for (const std::string& word : extra)
    if (detail::sameWord(t, word)) return true;
  return false;
}

/// Parses a whole field as a finite decimal number. On failure `why` says what is wrong.
inline bool parseNumber(std::string_view t, double& value, std::string& why) {
  if (t.size() > 200) {
    why = "field " + quoteForMessage(t) + " is too long to be a number";
    return false;
  }
  for (char c : t) {
    const bool ok = (c >= '0' && c <= '9') || c == '+' || c == '-' || c == '.' || c == 'e' || c == 'E';
    if (!ok) {
      why = quoteForMessage(t) + " is not a number";
      return false;
    }
  }
  char text[208];  // strtod needs a terminator
  t.copy(text, t.size());
  text[t.size()] = '\0';
  char* end = nullptr;
  value = std::strtod(text, &end);
  if (t.empty() || end != text + t.size()) {
    why = quoteForMessage(t) + " is not a number";
    return false;
  }
  if (!std::isfinite(value)) {
    why = quoteForMessage(t) + " is outside the range of a double";
    return false;
  }
  return true;
}

/// Reads a CSV stream line by line (constant memory: one line and its fields).
class CsvReader {
 public:
  /// Longest line accepted, in bytes (a guard against a file that is not line-structured).
  static constexpr std::size_t kMaxLine = std::size_t(1) << 20;

  CsvReader(std::istream& in, char separator) : m_in(in), m_separator(separator) {}

  /// Reads the header line. Fails on an empty file or a malformed header.
  bool readHeader(CsvProblem& problem) {
    const LineResult r = readLine(problem);
    if (r == LineResult::end) {
      problem = {1, 1, "the file is empty (no header line)"};
      return false;
    }
    if (r == LineResult::problem) return false;
    if (m_line.size() >= 3 && m_line.compare(0, 3, "\xEF\xBB\xBF") == 0) m_line.erase(0, 3);
    if (!split(problem)) return false;
    m_names.clear();
    for (std::size_t i = 0; i < m_bounds.size(); ++i) m_names.emplace_back(field(i));
    return true;
  }

  const std::vector<std::string>& names() const { return m_names; }

  enum class Next { row, end, problem };

  /// Reads the next non-blank data line and splits it; the row must have as many fields as the
  /// header.
  Next nextRow(CsvProblem& problem) {
    for (;;) {
      const LineResult r = readLine(problem);
      if (r == LineResult::end) return Next::end;
      if (r == LineResult::problem) return Next::problem;
      if (m_line.find_first_not_of(" \t") != std::string::npos) break;
    }
    if (!split(problem)) return Next::problem;
    if (m_bounds.size() != m_names.size()) {
      const bool few = m_bounds.size() < m_names.size();
      problem = {m_lineNumber, (few ? m_bounds.size() : m_names.size()) + 1,
                 "ragged row: " + std::to_string(m_bounds.size()) + (m_bounds.size() == 1 ? " field" : " fields") +
                     ", but the header has " + std::to_string(m_names.size())};
      return Next::problem;
    }
    return Next::row;
  }

  /// Field `index` (0-based) of the current row, unquoted and trimmed.
  std::string_view field(std::size_t index) const {
    const auto& b = m_bounds[index];
    return std::string_view(m_text).substr(b.first, b.second);
  }
  std::size_t fields() const { return m_bounds.size(); }
  /// Line number of the current row (1 = header).
  std::uint64_t line() const { return m_lineNumber; }
  /// Bytes consumed so far (for a progress indicator).
  std::uint64_t bytesRead() const { return m_bytes; }

 private:
  enum class LineResult { line, end, problem };

  LineResult readLine(CsvProblem& problem) {
    m_line.clear();
    std::streambuf* sb = m_in.rdbuf();
    if (sb == nullptr) return LineResult::end;
    int c = sb->sbumpc();
    if (c == std::char_traits<char>::eof()) return LineResult::end;
    ++m_lineNumber;
    while (c != std::char_traits<char>::eof() && c != '\n') {
      ++m_bytes;
      if (m_line.size() == kMaxLine) {
        problem = {m_lineNumber, 1, "line longer than " + std::to_string(kMaxLine) + " bytes"};
        return LineResult::problem;
      }
      m_line.push_back(static_cast<char>(c));
      c = sb->sbumpc();
    }
    if (c == '\n') ++m_bytes;
    if (!m_line.empty() && m_line.back() == '\r') m_line.pop_back();
    return LineResult::line;
  }

  bool isBlank(char c) const { return (c == ' ' || c == '\t') && c != m_separator; }

  /// Splits m_line into fields: unquoted, trimmed text in m_text, (offset, length) in m_bounds.
  bool split(CsvProblem& problem) {
    m_text.clear();
    m_bounds.clear();
    const std::size_t n = m_line.size();
    std::size_t i = 0;
    for (;;) {
      const std::size_t column = m_bounds.size() + 1;
      while (i < n && isBlank(m_line[i])) ++i;
      const std::size_t start = m_text.size();
      if (i < n && m_line[i] == '"') {
        ++i;
        for (;;) {
          if (i >= n) {
            problem = {m_lineNumber, column, "unterminated quote (a quoted field cannot span lines)"};
            return false;
          }
          if (m_line[i] == '"') {
            if (i + 1 < n && m_line[i + 1] == '"') {
              m_text.push_back('"');
              i += 2;
              continue;
            }
            ++i;
            break;
          }
          m_text.push_back(m_line[i++]);
        }
        while (i < n && isBlank(m_line[i])) ++i;
        if (i < n && m_line[i] != m_separator) {
          problem = {m_lineNumber, column, "unexpected text after the closing quote"};
          return false;
        }
      } else {
        while (i < n && m_line[i] != m_separator) m_text.push_back(m_line[i++]);
        while (m_text.size() > start && isBlank(m_text.back())) m_text.pop_back();
      }
      m_bounds.emplace_back(start, m_text.size() - start);
      if (i >= n) return true;
      ++i;  // the separator
    }
  }

  std::istream& m_in;
  char m_separator;
  std::string m_line;
  std::string m_text;
  std::vector<std::pair<std::size_t, std::size_t>> m_bounds;
  std::vector<std::string> m_names;
  std::uint64_t m_lineNumber = 0;
  std::uint64_t m_bytes = 0;
};

/// Resolves a column given by name or by 1-based number against the header. A name that the
/// header contains wins over a number; `role` ("response", "input", "weights") goes into the
/// message.
inline bool findColumn(const std::vector<std::string>& names, const std::string& token, const char* role,
                       std::size_t& index, CsvProblem& problem) {
  std::size_t found = names.size();
  for (std::size_t j = 0; j < names.size(); ++j) {
    if (names[j] != token) continue;
    if (found != names.size()) {
      problem = {1, j + 1,
                 std::string("the ") + role + " column name " + quoteForMessage(token) + " appears twice (columns " +
                     std::to_string(found + 1) + " and " + std::to_string(j + 1) + "); choose it by number"};
      return false;
    }
    found = j;
  }
  if (found != names.size()) {
    index = found;
    return true;
  }
  const bool digits = !token.empty() && token.size() < 10 && token.find_first_not_of("0123456789") == std::string::npos;
  if (digits) {
    const std::size_t number = static_cast<std::size_t>(std::stoul(token));
    if (number >= 1 && number <= names.size()) {
      index = number - 1;
      return true;
    }
    problem = {1, names.size() + 1,
               std::string("missing column: the ") + role + " column is number " + token + ", but the header has " +
                   std::to_string(names.size()) + (names.size() == 1 ? " column" : " columns")};
    return false;
  }
  problem = {
      1, names.size() + 1,
      std::string("missing column: no column named ") + quoteForMessage(token) + " for the " + role + " in the header"};
  return false;
}

}  // namespace rowfold_compare
