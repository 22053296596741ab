// Text output for the firmware images without stdio (newlib's printf would bring its allocator
// and ~6-20 KB of code). Numbers are formatted by hand; reals in scientific notation.
#pragma once

#include <cmath>
#include <cstddef>
#include <cstdint>

#include "board.h"

namespace fw {

/// Line builder over a fixed buffer; flush() sends it to the semihosting console.
class Line {
 public:
  Line& operator<<(const char* text) {
    while (*text != '\0') put(*text++);
    return *this;
  }
  Line& operator<<(char c) {
    put(c);
    return *this;
  }
  Line& operator<<(unsigned long long value) {
    char digits[24];
    int n = 0;
    do {
      digits[n++] = static_cast<char>('0' + value % 10u);
      value /= 10u;
    } while (value != 0);
    while (n > 0) put(digits[--n]);
    return *this;
  }
  Line& operator<<(unsigned value) { return *this << static_cast<unsigned long long>(value); }
  Line& operator<<(unsigned long value) { return *this << static_cast<unsigned long long>(value); }
  Line& operator<<(int value) {
    if (value < 0) {
      put('-');
      return *this << static_cast<unsigned long long>(-static_cast<long long>(value));
    }
    return *this << static_cast<unsigned long long>(value);
  }

  /// A real in scientific notation with `significant` digits (1..8), e.g. -9.7514e-01.
  template <typename Real>
  __attribute__((noinline)) Line& real(Real v, int significant = 5) {
    if (std::isnan(v)) return *this << "nan";
    if (v < Real(0)) {
      put('-');
      v = -v;
    }
    if (std::isinf(v)) return *this << "inf";
    int exponent = 0;
    if (v != Real(0)) {
      while (v >= Real(10)) {
        v /= Real(10);
        ++exponent;
      }
      while (v < Real(1)) {
        v *= Real(10);
        --exponent;
      }
      Real half = Real(0.5);
      for (int i = 1; i < significant; ++i) half /= Real(10);
      v += half;
      if (v >= Real(10)) {
        v /= Real(10);
        ++exponent;
      }
    }
    for (int i = 0; i < significant; ++i) {
      const int d = static_cast<int>(v);
      put(static_cast<char>('0' + (d > 9 ? 9 : d)));
      if (i == 0 && significant > 1) put('.');
      v = (v - Real(d)) * Real(10);
    }
    put('e');
    put(exponent < 0 ? '-' : '+');
    const int e = exponent < 0 ? -exponent : exponent;
    if (e < 10) put('0');
    return *this << e;
  }

  void flush() {
    m_text[m_size] = '\0';
    board_write(m_text);
    m_size = 0;
  }

 private:
  void put(char c) {
    if (m_size + 2 < sizeof m_text) m_text[m_size++] = c;
  }
  char m_text[200];
  std::size_t m_size = 0;
};

/// Running pass/fail bookkeeping: every failed check is printed with its label.
class Checks {
 public:
  template <typename Real>
  void near(const char* label, Real value, Real expected, Real tolerance) {
    ++m_run;
    const Real diff = value > expected ? value - expected : expected - value;
    if (diff <= tolerance) return;  // NaN fails too
    ++m_failed;
    Line l;
    l << "CHECK FAILED: " << label << ": ";
    l.real(value, 7) << " vs ";
    l.real(expected, 7) << " (tolerance ";
    l.real(tolerance, 2) << ")\n";
    l.flush();
  }
  void that(const char* label, bool ok) {
    ++m_run;
    if (ok) return;
    ++m_failed;
    Line l;
    l << "CHECK FAILED: " << label << '\n';
    l.flush();
  }
  unsigned run() const { return m_run; }
  unsigned failed() const { return m_failed; }

 private:
  unsigned m_run = 0;
  unsigned m_failed = 0;
};

}  // namespace fw
