// Tests for include/rowfold/student_t.hpp (Student's t CDF and quantile, normal quantile) against
// published table values, closed forms, and round trips between the quantile and the CDF.
#include <doctest/doctest.h>

#include <cmath>
#include <initializer_list>
#include <limits>

#include "rowfold/student_t.hpp"

using rowfold::normalQuantile;
using rowfold::studentTCdf;
using rowfold::studentTQuantile;

namespace {

template <typename T>
bool relClose(T got, T want, T tol) {
  return std::fabs(got - want) <= tol * std::fabs(want);
}

const double kInf = std::numeric_limits<double>::infinity();
const double kNaN = std::numeric_limits<double>::quiet_NaN();

// p grid from 1e-8 to 1 - 1e-8: both tails in steps of about half a decade, and the middle.
const double kGrid[] = {1e-8,  3e-8,  1e-7,   3e-7,     1e-6,     3e-6,     1e-5,     3e-5,
                        1e-4,  3e-4,  1e-3,   3e-3,     0.01,     0.025,    0.05,     0.1,
                        0.2,   0.25,  0.3,    0.4,      0.45,     0.49,     0.499999, 0.5,
                        0.501, 0.6,   0.7,    0.75,     0.8,      0.9,      0.95,     0.975,
                        0.99,  0.999, 0.9999, 1 - 1e-5, 1 - 1e-6, 1 - 1e-7, 1 - 1e-8};

}  // namespace

TEST_CASE("student_t: NIST/SEMATECH critical values") {
  // NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.6.7.2 "Critical values of
  // Student's t distribution": upper quantiles printed to 3 decimals, so agreement to 0.0005.
  struct Row {
    double nu, t95, t975, t995;
  };
  const Row table[] = {
      {1, 6.314, 12.706, 63.657}, {2, 2.920, 4.303, 9.925},  {3, 2.353, 3.182, 5.841},
      {4, 2.132, 2.776, 4.604},   {5, 2.015, 2.571, 4.032},  {10, 1.812, 2.228, 3.169},
      {20, 1.725, 2.086, 2.845},  {30, 1.697, 2.042, 2.750}, {kInf, 1.645, 1.960, 2.576},
  };
  for (const Row& r : table) {
    CAPTURE(r.nu);
    CHECK(std::fabs(studentTQuantile(0.95, r.nu) - r.t95) <= 0.0005);
    CHECK(std::fabs(studentTQuantile(0.975, r.nu) - r.t975) <= 0.0005);
    CHECK(std::fabs(studentTQuantile(0.995, r.nu) - r.t995) <= 0.0005);
  }
  // the same infinite-dof row (NIST/SEMATECH, as above) from the normal quantile itself
  CHECK(std::fabs(normalQuantile(0.95) - 1.645) <= 0.0005);
  CHECK(std::fabs(normalQuantile(0.975) - 1.960) <= 0.0005);
  CHECK(std::fabs(normalQuantile(0.995) - 2.576) <= 0.0005);
}

TEST_CASE("student_t: 12-digit reference quantiles") {
  // Computed by the project's authors with mpmath at 50 digits, recorded in shared NUMERICS.md
  // section 7.3 [H]; rounded to 12 significant digits, so compared to relative 1e-10.
  struct Ref {
    double p, nu, t;
  };
  const Ref refs[] = {
      {0.975, 10, 2.22813885199},  {0.975, 6, 2.44691185114},  {0.95, 60, 1.67064886490},
      {0.975, 120, 1.97993040508}, {0.9995, 1, 636.619248769}, {0.9995, 5, 6.86882662588},
      {0.995, 2, 9.92484320092},
  };
  for (const Ref& r : refs) {
    CAPTURE(r.p);
    CAPTURE(r.nu);
    CHECK(relClose(studentTQuantile(r.p, r.nu), r.t, 1e-10));
    CHECK(relClose(studentTQuantile(1 - r.p, r.nu), -r.t, 1e-10));
    CHECK(relClose(
        double(studentTQuantile(static_cast<long double>(r.p), static_cast<long double>(r.nu))),
        r.t, 1e-10));
    CHECK(relClose(studentTCdf(r.t, r.nu), r.p, 1e-10));
  }
}

TEST_CASE("student_t: closed forms") {
  const double pi = 3.14159265358979323846;
  // nu = 4 (Shaw 2006, J. Comput. Finance 9(4)): alpha = 4p(1-p),
  // q = cos(acos(sqrt(alpha))/3)/sqrt(alpha), t = sign(p - 1/2) 2 sqrt(q - 1); evaluated in long
  // double because q - 1 cancels towards p = 1/2. Independent of the quantile code for nu >= 3.
  for (double p : kGrid) {
    if (std::fabs(p - 0.5) < 0.05) continue;  // the closed form itself loses digits there
    const long double pl = p;
    const long double alpha = 4 * pl * (1 - pl);
    const long double q = std::cos(std::acos(std::sqrt(alpha)) / 3) / std::sqrt(alpha);
    const double want = double((p < 0.5 ? -2 : 2) * std::sqrt(q - 1));
    CAPTURE(p);
    CHECK(relClose(studentTQuantile(p, 4.0), want, 1e-12));
  }
  // CDF closed forms: nu = 1 (Cauchy) F = 1/2 + atan(t)/pi; nu = 2: F = 1/2 + t/(2 sqrt(2 + t^2)).
  // Upper tails compared through F(-t) so that the check is relative to the small tail.
  for (double t : {1e-6, 0.1, 0.5, 1.0, 2.0, 5.0, 30.0, 1e3, 1e6}) {
    CAPTURE(t);
    CHECK(relClose(studentTCdf(t, 1.0), 0.5 + std::atan(t) / pi, 1e-14));
    CHECK(relClose(studentTCdf(-t, 1.0), std::atan(1 / t) / pi, 1e-13));
    CHECK(relClose(studentTCdf(t, 2.0), 0.5 + t / (2 * std::sqrt(2 + t * t)), 1e-14));
    const double tail2 = 1 / (std::sqrt(2 + t * t) * (std::sqrt(2 + t * t) + t));  // 1/2 - t/(2s)
    CHECK(relClose(studentTCdf(-t, 2.0), tail2, 1e-13));
  }
  // quantile closed forms nu = 1: tan(pi(p - 1/2)); nu = 2: (2p - 1)/sqrt(2p(1 - p))
  for (double p : {0.01, 0.1, 0.3, 0.45, 0.7, 0.9, 0.975}) {
    CAPTURE(p);
    CHECK(relClose(studentTQuantile(p, 1.0), std::tan(pi * (p - 0.5)), 1e-13));
    CHECK(relClose(studentTQuantile(p, 2.0), (2 * p - 1) / std::sqrt(2 * p * (1 - p)), 1e-13));
  }
}

TEST_CASE("student_t: symmetry and round trip") {
  const double nus[] = {1, 2.5, 7, 30, 1000, 0.3, 1e6};
  const bool extended = std::numeric_limits<long double>::digits > 53;
  for (double nu : nus) {
    for (double p : kGrid) {
      CAPTURE(nu);
      CAPTURE(p);
      const double t = studentTQuantile(p, nu);
      // symmetry: for p >= 1/2, 1 - p is exact, and the code uses the same tail for both
      if (p >= 0.5) CHECK(studentTQuantile(1 - p, nu) == -t);
      // round trip, relative to the smaller tail min(p, 1 - p): F(t) = p, F(-t) = 1 - p
      if (p <= 0.5) {
        CHECK(relClose(studentTCdf(t, nu), p, 1e-12));
      } else {
        CHECK(relClose(studentTCdf(-t, nu), 1 - p, 1e-12));
      }
      // long double: at least as good as double (much better where long double is wider)
      const long double pl = p, nul = nu;
      const long double tl = studentTQuantile(pl, nul);
      const long double tolL = extended ? 1e-15L : 1e-12L;
      if (p <= 0.5) {
        CHECK(relClose(studentTCdf(tl, nul), pl, tolL));
      } else {
        CHECK(relClose(studentTCdf(-tl, nul), 1 - pl, tolL));
      }
      CHECK(relClose(double(tl), t, 1e-12));
    }
  }
  // float: computed in double and rounded, so within float rounding of the long double result
  for (float nu : {1.0f, 2.5f, 7.0f, 30.0f, 1000.0f}) {
    for (float p : {1e-6f, 1e-4f, 0.01f, 0.1f, 0.3f, 0.7f, 0.9f, 0.99f, 0.9999f}) {
      CAPTURE(nu);
      CAPTURE(p);
      const float t = studentTQuantile(p, nu);
      const long double want =
          studentTQuantile(static_cast<long double>(p), static_cast<long double>(nu));
      CHECK(relClose(static_cast<long double>(t), want, 1e-6L));
      if (p <= 0.5f) {
        CHECK(relClose(studentTCdf(t, nu), p, 1e-5f));
      } else {
        CHECK(relClose(studentTCdf(-t, nu), 1 - p, 1e-5f));
      }
    }
  }
}

TEST_CASE("student_t: special and invalid arguments") {
  CHECK(studentTQuantile(0.5, 3.0) == 0.0);
  CHECK(studentTCdf(0.0, 3.0) == 0.5);
  CHECK(studentTCdf(kInf, 3.0) == 1.0);
  CHECK(studentTCdf(-kInf, 3.0) == 0.0);
  CHECK(studentTQuantile(0.975, kInf) == normalQuantile(0.975));
  CHECK(relClose(studentTCdf(1.959963984540054, kInf), 0.975, 1e-15));
  // very large dof joins the normal quantile smoothly
  CHECK(relClose(studentTQuantile(0.975, 1e12), normalQuantile(0.975), 1e-11));
  // invalid input: NaN, never a trap or an exception
  for (double p : {0.0, 1.0, -0.1, 1.5, kNaN, kInf}) {
    CAPTURE(p);
    CHECK(std::isnan(studentTQuantile(p, 5.0)));
    CHECK(std::isnan(normalQuantile(p)));
  }
  for (double nu : {0.0, -1.0, -kInf, kNaN}) {
    CAPTURE(nu);
    CHECK(std::isnan(studentTQuantile(0.9, nu)));
    CHECK(std::isnan(studentTCdf(1.0, nu)));
  }
  CHECK(std::isnan(studentTCdf(kNaN, 5.0)));
  CHECK(std::isnan(studentTQuantile(0.9f, -1.0f)));
  CHECK(std::isnan(studentTCdf(kNaN, kInf)));
}
