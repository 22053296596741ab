/// @file
/// The solvers being compared, behind one small run-time interface (dynamic K), and the
/// extended-precision reference fed with the same rows. With --window every solver and the
/// reference fit a sliding window (BatchQr a ring of rows, the others rowfold::BlockWindow).
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <memory>

#include "rowfold/rowfold.hpp"
#include "settings.hpp"

namespace rowfold_compare {

using Summary = rowfold::Summary<double, Eigen::Dynamic>;

/// A batch of parsed rows, folded into every solver in turn (row-major: each x is contiguous).
struct Block {
  Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> x;
  Eigen::VectorXd y, w;
  Eigen::Index rows = 0;
  Block(Eigen::Index capacity, Eigen::Index k) : x(capacity, k), y(capacity), w(capacity) {}
  bool full() const { return rows == x.rows(); }
};

/// One solver under test. fold() times its add() calls with std::chrono::steady_clock.
class Contender {
 public:
  virtual ~Contender() = default;
  SolverKind kind() const { return m_kind; }
  const char* name() const { return solverName(m_kind); }

  /// Folds rows [from, to) of `b`. A solver that is full (BatchQr at capacity) stops taking rows.
  virtual void fold(const Block& b, Eigen::Index from, Eigen::Index to) = 0;
  virtual rowfold::Status summarize(Summary& out, double level) const = 0;
  /// Prediction b0 + x'b from the rows folded so far (NaN when there is no fit yet).
  virtual double predict(const Eigen::Ref<const Eigen::VectorXd>& x) const = 0;
  /// Construction status (invalid options give a status other than ok).
  virtual rowfold::Status status() const = 0;

  double foldSeconds() const { return m_seconds; }
  std::uint64_t folded() const { return m_folded; }
  /// Rows refused because the solver was full (BatchQr capacity), and the reason.
  std::uint64_t refused() const { return m_refused; }
  rowfold::Status refusal() const { return m_refusal; }

 protected:
  explicit Contender(SolverKind kind) : m_kind(kind) {}
  SolverKind m_kind;
  double m_seconds = 0.0;
  std::uint64_t m_folded = 0;
  std::uint64_t m_refused = 0;
  rowfold::Status m_refusal = rowfold::Status::ok;
};

std::unique_ptr<Contender> makeContender(SolverKind kind, Eigen::Index k, const Settings& settings);

/// rowfold::GivensQr<long double, Eigen::Dynamic> fed with the same rows (not timed).
class Reference {
 public:
  using Scalar = long double;
  using Vector = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;
  Reference(Eigen::Index k, const Settings& settings);
  ~Reference();
  void fold(const Block& b);
  /// Coefficients and intercept of the reference fit; false when it has none.
  bool solve(Vector& coefficients, Scalar& intercept) const;
  /// Significand bits of long double on this machine.
  static int precisionBits();

  /// The fit behind the reference: plain, or a block window (--window).
  struct Fit {
    virtual ~Fit() = default;
    virtual void add(const Vector& x, Scalar y, Scalar w) = 0;
    virtual rowfold::Solution<Scalar, Eigen::Dynamic> solve() const = 0;
  };

 private:
  std::unique_ptr<Fit> m_fit;
  Vector m_x;
};

}  // namespace rowfold_compare
