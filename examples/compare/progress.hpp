/// @file
/// A one-line progress indicator on stderr, shown only when stderr is a terminal.
#pragma once

#include <unistd.h>

#include <chrono>
#include <cstdint>
#include <cstdio>

namespace rowfold_compare {

class Progress {
 public:
  /// `totalBytes` = 0 when the size is unknown (standard input, a pipe).
  Progress(bool wanted, std::uint64_t totalBytes)
      : m_on(wanted && ::isatty(STDERR_FILENO) == 1), m_total(totalBytes), m_last(std::chrono::steady_clock::now()) {}
  Progress(const Progress&) = delete;
  Progress& operator=(const Progress&) = delete;
  ~Progress() { done(); }

  /// Cheap to call for every row: looks at the clock every 4096 rows, redraws 4 times a second.
  void update(std::uint64_t bytes, std::uint64_t rows) {
    if (!m_on || (++m_calls & 4095u) != 0) return;
    const auto now = std::chrono::steady_clock::now();
    if (now - m_last < std::chrono::milliseconds(250)) return;
    m_last = now;
    if (m_total > 0)
      std::fprintf(stderr, "\rrowfold-compare: %.1f of %.1f MB (%.0f %%), %llu rows ", bytes / 1e6, m_total / 1e6,
                   100.0 * static_cast<double>(bytes) / static_cast<double>(m_total),
                   static_cast<unsigned long long>(rows));
    else
      std::fprintf(stderr, "\rrowfold-compare: %.1f MB, %llu rows ", bytes / 1e6,
                   static_cast<unsigned long long>(rows));
    m_shown = true;
  }

  /// Clears the line.
  void done() {
    if (m_shown) std::fprintf(stderr, "\r%60s\r", "");
    m_shown = false;
  }

 private:
  bool m_on;
  std::uint64_t m_total;
  std::chrono::steady_clock::time_point m_last;
  std::uint64_t m_calls = 0;
  bool m_shown = false;
};

}  // namespace rowfold_compare
