/// @file
/// Error-free transformations and a double-length ("twofold") accumulator built on FMA.
/// Works for any IEEE Scalar with a correctly rounded fma, so it gives extended precision
/// even where long double is plain double. Sources: Dekker 1971 (Numer. Math. 18:224-242);
/// Ogita, Rump & Oishi 2005, "Accurate sum and dot product", SIAM J. Sci. Comput. 26(6).
#pragma once

#include <cmath>

namespace rowfold::detail {

/// s + e == a + b exactly (Knuth's TwoSum, 6 flops, no branch).
template <typename Scalar>
inline void twoSum(Scalar a, Scalar b, Scalar& s, Scalar& e) noexcept {
  s = a + b;
  const Scalar bb = s - a;
  e = (a - (s - bb)) + (b - bb);
}

/// p + e == a * b exactly (FMA-based TwoProduct).
template <typename Scalar>
inline void twoProd(Scalar a, Scalar b, Scalar& p, Scalar& e) noexcept {
  p = a * b;
  e = std::fma(a, b, -p);
}

/// A value held as an unevaluated sum hi + lo (about twice the working precision).
template <typename Scalar>
struct Twofold {
  Scalar hi = 0;
  Scalar lo = 0;

  /// Adds a working-precision value (Ogita-Rump-Oishi Sum2 step).
  void add(Scalar a) noexcept {
    Scalar s, e;
    twoSum(hi, a, s, e);
    hi = s;
    lo += e;
  }
  /// Adds the exact product a*b.
  void addProduct(Scalar a, Scalar b) noexcept {
    Scalar p, e;
    twoProd(a, b, p, e);
    add(p);
    lo += e;
  }
  /// Adds the exact product (a.hi + a.lo) * b, to twofold accuracy.
  void addProduct(const Twofold& a, Scalar b) noexcept {
    addProduct(a.hi, b);
    lo += a.lo * b;
  }
  /// Adds another twofold value.
  void add(const Twofold& a) noexcept {
    add(a.hi);
    lo += a.lo;
  }
  /// The twofold value times a working-precision scalar.
  Twofold scaled(Scalar b) const noexcept {
    Twofold t;
    twoProd(hi, b, t.hi, t.lo);
    t.lo += lo * b;
    return t;
  }
  Scalar value() const noexcept { return hi + lo; }
};

/// a - b held exactly as a twofold value.
template <typename Scalar>
inline Twofold<Scalar> exactDifference(Scalar a, Scalar b) noexcept {
  Twofold<Scalar> t;
  twoSum(a, -b, t.hi, t.lo);
  return t;
}

}  // namespace rowfold::detail
