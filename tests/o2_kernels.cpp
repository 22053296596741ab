// Regression: g++ 12.2 at -O2 *without* NDEBUG miscompiled the fixed-size descending back
// substitution (the vector came back unchanged); Release (-O3 -DNDEBUG), Debug (-O0) and clang
// were fine. This program is built with exactly those flags (tests/CMakeLists.txt) and solves a
// 4x4 triangular system whose solution is known in exact fractions: y1 = 0.25/0.07 = 25/7,
// y0 = 0.25 - 0.99 * 25/7 = -23/7 (solved by hand). The values come from argc so that nothing
// is folded at compile time. Exit status 0 = correct.
#include <cmath>
#include <cstdio>

#include "rowfold/detail/pivoted_qr.hpp"

namespace {

// Out of line, so the comparison reads what the kernel left in memory.
[[gnu::noinline]] bool matches(const double* got, const double* want) {
  bool ok = true;
  for (int i = 0; i < 4; ++i) ok = ok && std::abs(got[i] - want[i]) <= 1e-14 * std::abs(want[i]);
  return ok;
}

}  // namespace

int main(int argc, char**) {
  Eigen::Matrix4d T = Eigen::Matrix4d::Identity();
  T(0, 1) = 0.99;
  T(1, 1) = 0.07;
  Eigen::Vector4d y = Eigen::Vector4d::Constant(0.25 * argc);
  rowfold::detail::backSubstitute(T, y, 4);
  const double want[] = {-23.0 / 7.0, 25.0 / 7.0, 0.25, 0.25};
  const double got[] = {y(0), y(1), y(2), y(3)};
  const bool ok = matches(got, want);
  std::printf("back substitution at -O2 with assertions: %g %g %g %g (%s)\n", y(0), y(1), y(2), y(3),
              ok ? "ok" : "WRONG");
  return ok ? 0 : 1;
}
