/// @file
/// BatchQr: keeps the rows, Householder QR at solve time, refined on the augmented system.
#pragma once

#include <cmath>
#include <cstdint>
#include <limits>
#include <type_traits>

#include "rowfold/detail/pivoted_qr.hpp"
#include "rowfold/detail/twofold.hpp"
#include "rowfold/estimator_base.hpp"

namespace rowfold {

/// Options of BatchQr.
struct BatchQrOptions : FitOptions {
  /// Rows kept when the capacity is a runtime value (Capacity = Eigen::Dynamic); must be > 0.
  /// Ignored for a compile-time Capacity.
  Eigen::Index capacity = 1024;
  /// Maximum refinement sweeps after the first solve (stops earlier when the correction is
  /// below rounding or stops shrinking); must be >= 0; 0 = plain Householder QR.
  int refinementSteps = 8;
  /// Exact rectangular sliding window: when the buffer is full, a new row overwrites the oldest
  /// (ring buffer) instead of being refused with capacity_full. The fit and the statistics then
  /// describe exactly the last `capacity` rows (see the class comment).
  bool slide = false;
};

/// Least squares on the stored rows: Householder QR of the weighted, centered design
/// [omega, omega (x - c)] (omega_i = sqrt(w_i lambda^age_i); the omega column carries the
/// intercept exactly), then iterative refinement on the augmented system
/// ```
///   [ I  A ] [ r ]   [ b ]        f = b - r - A x,   g = -A' r   (residuals in twofold precision,
///   [ A' 0 ] [ x ] = [ 0 ]        computed from the *raw* stored data)
/// ```
/// (Björck 1967, BIT 7:257-278, from memory; Björck 1996 §2.9.4, section from memory).
/// Because the residuals f and g are formed
/// in twofold (double-length, FMA-based) arithmetic against the raw data, the solution is
/// accurate to nearly the last digit the data allow even for large-residual problems, where
/// plain refinement of x alone does not help. This is the library's accuracy reference.
///
/// **Stability:** Householder QR is backward stable; with refinement the forward error is
/// ~ u kappa_s (kappa_s = scaled condition), independent of the residual size while
/// u kappa_s << 1.
///
/// **Cost:** add O(K) (validates and stores the row; its step of the base's centering record is
/// deferred and run, with the fold's operations in arrival order, when the record is read:
/// count(), weightSum(), every query, centering(), merge, snapshot, relax; O(K) per deferred
/// row); solve O(n K^2) plus O(n K) per refinement sweep;
/// memory capacity (K + 2) scalars of rows plus capacity (K + 4) of workspace (n = rows stored).
/// Rows are kept in a fixed (Capacity) or runtime (options.capacity) buffer; when it is full,
/// add returns Status::capacity_full and leaves the state untouched.
/// Every query (solve, summarize, conditioning, predict, predictionInterval, crossProducts)
/// redoes the factorization and refinement from the stored rows.
///
/// **Status and flags:** those of EstimatorBase, plus `capacity_full` from add/addRows when
/// the buffer is full (never with `slide`), and `invalid_options` from status() (capacity <= 0
/// or refinementSteps < 0; add then returns `invalid_options` too). Fewer rows than coefficients, or a
/// numerically dependent column, take the basic-solution path without refinement
/// (`rank_deficient`).
///
/// **Forgetting:** row i of n is weighted by w_i lambda^(n-1-i) at solve time; without `slide`
/// nothing is dropped, so with lambda < 1 the capacity still bounds the memory.
///
/// **Sliding window (`options.slide`):** the buffer is a ring; when it is full the oldest row is
/// overwritten, so the fit is exactly the least-squares fit of the last `capacity` rows, solved
/// from scratch (no downdating: nothing can lose definiteness, and the accuracy is that of a batch
/// fit of those rows; NUMERICS §3). Under forgetting a row's age is its position counted from the
/// newest row of the window, whatever its slot in the buffer, and the solve takes the rows in
/// arrival order, so it is bit-identical to that of a non-sliding state fed the same rows. count(),
/// weightSum() and effectiveCount() (so every statistic) describe the rows in the window: n, W =
/// sum w lambda^age, F = sum lambda^age, F2 = sum lambda^(2 age) over the window (F and F2 by
/// position: relax() scales the stored weights, hence W, but not F and F2). `centering()` is the
/// base class's running record of every row ever folded and is not used by this estimator's fit. A
/// snapshot holds the window's rows oldest first (restore puts them back in that order), so it
/// equals the image of a non-sliding state fed exactly those rows, apart from the option byte and
/// the centering record. `merge` folds the other state's rows in after this state's, oldest first,
/// as if added one by one: the window keeps the last `capacity` of them (never capacity_full).
/// Cost: add O(K) whether or not a row is dropped; merge O(n K).
template <typename Scalar_, int K_, int Capacity_ = Eigen::Dynamic, int MaxK_ = K_>
class BatchQr : public EstimatorBase<BatchQr<Scalar_, K_, Capacity_, MaxK_>, Scalar_, K_, MaxK_> {
  using Base = EstimatorBase<BatchQr<Scalar_, K_, Capacity_, MaxK_>, Scalar_, K_, MaxK_>;
  friend Base;
  template <typename, int>
  friend class MultiResponse;  // reads the shared state, writes a response's view

 public:
  using typename Base::Dims;  ///< see EstimatorBase
  using typename Base::Scalar;  ///< see EstimatorBase
  using typename Base::Vector1;  ///< see EstimatorBase
  using typename Base::WorkspaceType;  ///< see EstimatorBase
  using Options = BatchQrOptions;  ///< options type
  /// Error model of the conditioning analysis: solved against the raw stored data.
  static constexpr detail::ErrorModel errorModel = detail::ErrorModel::refined_raw;
  static constexpr EstimatorKind kind = EstimatorKind::batch_qr;  ///< snapshot image kind
  /// Ages are positional and the solve is a batch: no windup guard or outlier gate.
  static constexpr bool guardable = false;
  /// A row's age is its position: a late row would age the rows before it, so addDelayed and
  /// advance refuse (not_available) under forgetting.
  static constexpr bool positionalAges = true;
  /// add() only stores the row; the centering record catches up from the stored rows when it is
  /// read (see syncCentering).
  static constexpr bool deferredCentering = true;
  static constexpr int sizedUpTo = 8;  ///< per-size copies of add for a runtime K up to 8 (EstimatorBase::addSized)
  /// Stored regressors, capacity x K, one row per sample (row-major, so that storing a sample
  /// writes K adjacent scalars; inline storage for a fixed Capacity and K).
  using RowMatrix = Eigen::Matrix<Scalar, Eigen::Dynamic, K_, (K_ == 1 ? Eigen::ColMajor : Eigen::RowMajor), Capacity_, MaxK_>;
  /// A column of capacity entries (responses, weights, solve scratch).
  using Column = Eigen::Matrix<Scalar, Eigen::Dynamic, 1, Eigen::ColMajor, Capacity_, 1>;
  /// Solve-time copy of the design, capacity x (K+1).
  using Design = Eigen::Matrix<Scalar, Eigen::Dynamic, Dims::K1, Eigen::ColMajor, Capacity_, Dims::MaxK1>;

  /// Fixed K. status() reports invalid options.
  explicit BatchQr(const Options& options = Options()) : BatchQr(K_ == Eigen::Dynamic ? 0 : K_, options) {}
  /// Runtime K (any K > 0 for Eigen::Dynamic; must equal K otherwise, else status() is
  /// `wrong_size`). Allocates the row buffer and the solve workspace (capacity (2K + 6) scalars
  /// plus O(K)) unless Capacity and K are compile-time; nothing later.
  BatchQr(Eigen::Index k, const Options& options)
      : Base(k, options),  // first: regressors() below is the storage size (detail::storedSize)
        m_options(options),
        m_capacity(Capacity_ != Eigen::Dynamic ? Capacity_ : options.capacity > 0 ? options.capacity : 0),
        m_x(m_capacity, this->regressors()),
        m_y(m_capacity),
        m_w(m_capacity),
        m_design(m_capacity, this->regressors() + 1),
        m_qtb(m_capacity),
        m_r(m_capacity),
        m_f(m_capacity),
        m_tau(this->regressors() + 1),
        m_sol(this->regressors() + 1),
        m_solLo(this->regressors() + 1),
        m_dx(this->regressors() + 1),
        m_tmp(this->regressors() + 1),
        m_syncRow(this->regressors() + 1) {
    if (!(m_capacity > 0) || options.refinementSteps < 0) this->refuseOptions();  // status() is then invalid_options
    m_x.setZero();  // once: nothing reads a slot beyond rows(), but copies copy the whole buffer
    m_y.setZero();
    m_w.setZero();
    clearState();
  }

  /// Rows the buffer holds (Capacity, or options.capacity for Eigen::Dynamic).
  Eigen::Index capacity() const { return m_capacity; }
  /// Rows stored now (accepted samples of positive weight since the last reset; with `slide`,
  /// the rows in the window, at most capacity()).
  Eigen::Index rows() const { return m_n; }
  /// True when the buffer is a sliding window (options.slide).
  bool sliding() const { return m_options.slide; }
  /// Sweeps of the last factorization, counting the first (plain QR) solve: 1 to
  /// refinementSteps + 1; 0 on the rank-deficient path or before any query.
  int refinementSweeps() const { return m_sweeps; }

 private:
  std::uint64_t room() const {
    if (this->status() != Status::ok) return 0;
    return m_options.slide ? std::numeric_limits<std::uint64_t>::max() : static_cast<std::uint64_t>(m_capacity - m_n);
  }
  void clearState() {
    m_n = 0;
    m_head = 0;
    m_pending = 0;  // the stored rows are dead: only slots below rows() are ever read
  }

  template <typename Self, typename V>
  static void visitOptions(Self& self, V& v) {
    const std::uint64_t capacity = static_cast<std::uint64_t>(self.m_capacity);
    v.field(capacity);
    const std::uint8_t slide = self.m_options.slide ? 1 : 0;
    v.field(slide);
  }
  /// Only the rows in use are stored, oldest first: n, then x (n x K, column by column), y, w.
  /// A sliding window is written in its logical order (slots head..end, then 0..head) and read
  /// back with the oldest row in slot 0.
  template <typename Self, typename V>
  static void visitState(Self& self, V& v) {
    std::uint64_t n = static_cast<std::uint64_t>(self.m_n);
    v.field(n);
    if constexpr (!std::is_const<Self>::value) {
      self.m_n = static_cast<Eigen::Index>(n);
      self.m_head = 0;
      self.m_pending = 0;  // the image's centering record is complete
    }
    const std::size_t rows = static_cast<std::size_t>(self.m_n), head = static_cast<std::size_t>(self.m_head);
    const auto both = [&v, rows, head](auto* data) {
      v.array(data + head, rows - head);
      v.array(data, head);
    };
    // x is stored by rows and written by columns (the image keeps its column-by-column layout).
    for (Eigen::Index j = 0; j < self.m_x.cols(); ++j) {
      if constexpr (std::is_same<V, detail::ImageCounter>::value) {
        v.array(static_cast<const Scalar*>(nullptr), rows);
      } else {
        for (Eigen::Index pos = 0; pos < self.m_n; ++pos) v.field(self.m_x(self.slot(pos), j));
      }
    }
    both(self.m_y.data());
    both(self.m_w.data());
  }
  std::size_t expectedStateBytes(const unsigned char* state, std::size_t available) const {
    if (available < sizeof(std::uint64_t)) return std::numeric_limits<std::size_t>::max();
    const auto n = detail::getField<std::uint64_t>(state);
    if (n > static_cast<std::uint64_t>(m_capacity)) return std::numeric_limits<std::size_t>::max();
    return sizeof(std::uint64_t) + static_cast<std::size_t>(n) * static_cast<std::size_t>(this->regressors() + 2) * sizeof(Scalar);
  }

  template <typename XD>
  void foldRow(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w, const Vector1&, Scalar) {
    syncCentering();  // addDelayed: the base commits this row to the centering itself
    push(x.transpose(), y, w);
  }

  /// add()/addRows(): stores the row, or returns capacity_full when there is no room (add()
  /// leaves that test to this one compare; addRows() checked room() already). The row's
  /// centering step is deferred (syncCentering). A full sliding window whose rows are all
  /// pending commits them first, before the oldest is overwritten.
  template <typename XD>
  Status storeRow(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    if (!(m_n < m_capacity)) return storeInFullBuffer(x, y, w);  // a free slot costs this one test
    push(x.transpose(), y, w);
    ++m_pending;
    return Status::ok;
  }
  // Out of line: inlined, its commit loop made every add() save and restore registers.
  template <typename XD>
  EIGEN_DONT_INLINE Status storeInFullBuffer(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w) {
    if (!m_options.slide || this->status() != Status::ok) return Status::capacity_full;
    if (m_pending == m_capacity) syncCentering();
    push(x.transpose(), y, w);
    ++m_pending;
    return Status::ok;
  }

  /// Commits the rows stored since the last commit (the newest m_pending rows, oldest first) to
  /// the base's centering with exactly the operations the base's fold() runs per sample
  /// (Centering::centeredRow, then commitStep, lambda the nominal forgetting factor: BatchQr has
  /// no guard to change it), so means, W, F, F2, Syy and the count are those of eager centering:
  /// bit for bit where the compiler does not contract multiply-adds (x86-64 portable builds), to
  /// rounding where it does (aarch64, -march with FMA: g++ fuses the same source differently in
  /// different inlining contexts). When the rows are committed never changes the result: the
  /// record read after every row equals, bit for bit, the record read once at the end.
  /// The stored x, y, w are the sample's own (relax() commits before it scales w).
  /// O(K) per pending row; called by the base before any read of the centering.
  void syncCentering() const {
    if (m_pending == 0) return;
    auto& c = this->deferredCenteringState();
    const Scalar lambda = static_cast<Scalar>(this->fitOptions().forgetting);
    const Intercept mode = this->interceptMode();
    for (Eigen::Index pos = m_n - m_pending; pos < m_n; ++pos) {
      const Eigen::Index s = slot(pos);
      const auto step = c.centeredRow(m_x.row(s).transpose(), m_y(s), m_w(s), lambda, mode, m_syncRow);
      c.commitStep(step, lambda, mode, m_syncRow);
    }
    m_pending = 0;
  }

  /// Stores a row in the next free slot or, when the buffer is full (sliding window only; room()
  /// refuses otherwise), over the oldest row.
  template <typename RD>
  void push(const Eigen::MatrixBase<RD>& xRow, Scalar y, Scalar w) {
    Eigen::Index at = m_n;
    if (m_n < m_capacity) {
      ++m_n;
    } else {
      at = m_head;
      m_head = m_head + 1 == m_capacity ? 0 : m_head + 1;
    }
    detail::sizedAs<int(RD::SizeAtCompileTime)>(m_x.row(at)) = xRow;  // add()'s copies: a fixed-length store
    m_y(at) = y;
    m_w(at) = w;
  }
  /// Buffer slot of the row at logical position `pos` (0 = oldest).
  Eigen::Index slot(Eigen::Index pos) const {
    const Eigen::Index s = m_head + pos;
    return s < m_capacity ? s : s - m_capacity;
  }

  /// What the fit remembers (the memory* hooks of EstimatorBase). Without `slide` no row ever
  /// leaves, so the centering's record is exact; a sliding window sums over its rows.
  std::uint64_t memoryCount() const {
    return m_options.slide ? static_cast<std::uint64_t>(m_n) : this->centering().count();
  }
  Scalar memoryWeight() const {
    if (!m_options.slide) return this->centering().weightSum();
    detail::Twofold<Scalar> acc;
    for (Eigen::Index i = 0; i < m_n; ++i) {
      const Scalar om = omega(i);
      acc.addProduct(om, om);
    }
    return acc.value();
  }
  Scalar memoryForget() const { return m_options.slide ? geometricSum(1) : this->centering().forgetSum(); }
  Scalar memoryForget2() const { return m_options.slide ? geometricSum(2) : this->centering().forgetSum2(); }
  /// sum_{a=0}^{n-1} lambda^(power a) = (1 - lambda^(power n)) / (1 - lambda^power), with expm1
  /// and log1p so that lambda close to 1 loses no digits (1 - lambda is exact for lambda >= 1/2).
  Scalar geometricSum(int power) const {
    const Scalar lambda = static_cast<Scalar>(this->fitOptions().forgetting), n = Scalar(m_n);
    if (lambda == Scalar(1)) return n;
    const Scalar q = Scalar(1) - lambda, p = Scalar(power);
    const Scalar denominator = power == 1 ? q : q * (Scalar(1) + lambda);
    return -std::expm1(p * n * std::log1p(-q)) / denominator;
  }

  void ageState(Scalar f) { m_w.head(m_n) *= f; }
  template <int KV = K_>  // the loop length of add's per-size copies (EstimatorBase); unused
  bool priorInfo(const Vector1&, Scalar&, Scalar&) const { return false; }
  void ageResidual(Scalar) {}
  template <typename VD>
  bool currentSlopes(VD&) const { return false; }

  Status canMerge(const BatchQr& other) const {
    return room() < static_cast<std::uint64_t>(other.m_n) ? Status::capacity_full : Status::ok;
  }
  /// The other state's rows are appended after this state's, oldest first (a sliding window
  /// drops its oldest rows as they come): their ages follow from the order.
  void mergeState(const BatchQr& other, Scalar, const Vector1&) {
    for (Eigen::Index i = 0; i < other.m_n; ++i) {
      const Eigen::Index j = other.slot(i);
      push(other.m_x.row(j), other.m_y(j), other.m_w(j));
    }
  }

  /// omega_i = sqrt(w_i lambda^age). Here and in the solve, row i is the i-th row in arrival
  /// order (0 = oldest), stored in buffer slot slot(i) (= i until a sliding window wraps): the
  /// solve sees the rows in the same order as a non-sliding state fed the same rows.
  Scalar omega(Eigen::Index i) const {
    const Scalar lambda = this->lambda();
    const Scalar age = Scalar(m_n - 1 - i);
    const Scalar w = m_w(slot(i));
    return std::sqrt(lambda == Scalar(1) ? w : w * std::pow(lambda, age));
  }

  /// A_ij in twofold precision from the raw data: omega_i (x_ij - c_j), column 0 = omega_i
  /// when the intercept is fitted.
  detail::Twofold<Scalar> designEntry(Eigen::Index i, Eigen::Index col, Scalar om, const WorkspaceType& ws) const {
    if (m_offset == 1 && col == 0) return detail::Twofold<Scalar>{om, Scalar(0)};
    const Eigen::Index j = col - m_offset;
    return detail::exactDifference(m_x(slot(i), j), ws.xbar(j)).scaled(om);
  }
  detail::Twofold<Scalar> rhsEntry(Eigen::Index i, Scalar om, const WorkspaceType& ws) const {
    return detail::exactDifference(m_y(slot(i)), ws.ybar).scaled(om);
  }

  void applyQt(Eigen::Index n, Eigen::Index p, Column& v) const {
    for (Eigen::Index j = 0; j < p; ++j) detail::applyReflector(m_design, j, n, m_tau(j), v);
  }
  void applyQ(Eigen::Index n, Eigen::Index p, Column& v) const {
    for (Eigen::Index j = p - 1; j >= 0; --j) detail::applyReflector(m_design, j, n, m_tau(j), v);
  }

  bool factorize(WorkspaceType& ws) const {
    using std::abs;
    const Eigen::Index k = this->regressors();
    const Eigen::Index n = m_n;
    m_offset = this->interceptMode() == Intercept::fit ? 1 : 0;
    const Eigen::Index p = k + m_offset;
    ws.flags = Flags();

    // Centering constants c = weighted means (any constant is exact: the omega column absorbs
    // the difference; the weighted mean makes the design nearly orthogonal to it).
    detail::Twofold<Scalar> wsum;
    for (Eigen::Index i = 0; i < n; ++i) m_f(i) = omega(i);
    for (Eigen::Index i = 0; i < n; ++i) wsum.addProduct(m_f(i), m_f(i));
    ws.weight = wsum.value();
    ws.xbar.setZero();
    ws.ybar = Scalar(0);
    if (m_offset == 1) {
      for (Eigen::Index j = 0; j < k; ++j) {
        detail::Twofold<Scalar> acc;
        for (Eigen::Index i = 0; i < n; ++i) acc.addProduct(m_f(i) * m_f(i), m_x(slot(i), j));
        ws.xbar(j) = acc.value() / ws.weight;
      }
      detail::Twofold<Scalar> acc;
      for (Eigen::Index i = 0; i < n; ++i) acc.addProduct(m_f(i) * m_f(i), m_y(slot(i)));
      ws.ybar = acc.value() / ws.weight;
    }

    // Householder QR of the design (Golub & Van Loan 2013 §5.2.1), reflectors kept below R.
    for (Eigen::Index i = 0; i < n; ++i) {
      for (Eigen::Index c = 0; c < p; ++c) m_design(i, c) = designEntry(i, c, m_f(i), ws).value();
      m_qtb(i) = rhsEntry(i, m_f(i), ws).value();
    }
    for (Eigen::Index j = 0; j < p && j < n; ++j) {
      m_tau(j) = detail::makeReflector(m_design, j, n, m_design.col(j).segment(j, n - j).squaredNorm());
      for (Eigen::Index c = j + 1; c < p; ++c) {
        auto col = m_design.col(c);
        detail::applyReflector(m_design, j, n, m_tau(j), col);
      }
    }
    const Eigen::Index rows = n < p ? n : p;  // fewer rows than coefficients: R has n rows
    applyQt(n, rows, m_qtb);

    // Trailing K x K block = factor of the centered design (projection orthogonal to omega).
    ws.R.setZero();
    for (Eigen::Index j = 0; j < k; ++j)
      for (Eigen::Index i = 0; i <= j && i + m_offset < rows; ++i) ws.R(i, j) = m_design(i + m_offset, j + m_offset);
    for (Eigen::Index j = 0; j < k; ++j) ws.z(j) = j + m_offset < rows ? m_qtb(j + m_offset) : Scalar(0);

    const bool fullRank = n >= p && !detail::hasDependentColumn(ws.R) &&
                          (m_offset == 0 || abs(m_design(0, 0)) > Scalar(0));
    m_sweeps = 0;
    if (!fullRank) {
      // Basic solution of the slopes from the centered factor; intercept from the first row.
      ws.rank = detail::solveUpperWithRank(ws.R, ws.z, ws.b, ws.scratch, ws.scale, ws.pivoted);
      m_sol.setZero();
      m_solLo.setZero();
      m_sol.segment(m_offset, k) = ws.b;
      if (m_offset == 1 && m_design(0, 0) != Scalar(0))
        m_sol(0) = (m_qtb(0) - m_design.row(0).segment(1, k).dot(ws.b)) / m_design(0, 0);
    } else {
      ws.rank = k;
      refine(n, p, ws);
    }
    finishFromSolution(n, k, ws);
    return true;
  }

  /// Björck's refinement on the augmented system, starting from x = 0, r = 0 (the first sweep
  /// is the plain QR solution).
  void refine(Eigen::Index n, Eigen::Index p, WorkspaceType& ws) const {
    const Scalar eps = std::numeric_limits<Scalar>::epsilon();
    const auto R = m_design.topLeftCorner(p, p);  // upper triangle holds the factor
    m_sol.setZero();
    m_solLo.setZero();
    m_r.head(n).setZero();
    Scalar lastNorm = std::numeric_limits<Scalar>::infinity();
    const int maxSweeps = m_options.refinementSteps + 1;
    for (int sweep = 0; sweep < maxSweeps; ++sweep) {
      // f = b - r - A x ;  g = -A' r   (twofold, raw data)
      m_dx.head(p).setZero();
      for (Eigen::Index i = 0; i < n; ++i) {
        const Scalar om = m_f(i);
        detail::Twofold<Scalar> fi = rhsEntry(i, om, ws);
        fi.add(-m_r(i));
        for (Eigen::Index c = 0; c < p; ++c) {
          const detail::Twofold<Scalar> a = designEntry(i, c, om, ws);
          fi.addProduct(a, -m_sol(c));
          fi.lo -= a.hi * m_solLo(c);
        }
        m_qtb(i) = fi.value();
      }
      for (Eigen::Index c = 0; c < p; ++c) {
        detail::Twofold<Scalar> gc;
        for (Eigen::Index i = 0; i < n; ++i) gc.addProduct(designEntry(i, c, m_f(i), ws), -m_r(i));
        m_tmp(c) = gc.value();
      }
      // Correction: Q'f = [f1; f2], d1 = R^-T g, dx = R^-1 (f1 - d1), dr = Q [d1; f2].
      m_dx.head(p) = m_tmp.head(p);
      detail::forwardSubstituteTransposed(R, m_dx);  // d1 (first p entries)
      applyQt(n, p, m_qtb);
      m_tmp.head(p) = m_qtb.head(p) - m_dx.head(p);
      detail::backSubstitute(R, m_tmp, p);
      for (Eigen::Index c = 0; c < p; ++c) {  // x += dx, kept as an unevaluated twofold sum
        Scalar hi, lo;
        detail::twoSum(m_sol(c), m_tmp(c), hi, lo);
        lo += m_solLo(c);
        m_sol(c) = hi + lo;
        m_solLo(c) = lo - (m_sol(c) - hi);
      }
      const Scalar stepNorm = m_tmp.head(p).template lpNorm<Eigen::Infinity>();
      m_qtb.head(p) = m_dx.head(p);
      applyQ(n, p, m_qtb);
      m_r.head(n) += m_qtb.head(n);
      ++m_sweeps;
      const Scalar solNorm = m_sol.template lpNorm<Eigen::Infinity>();
      // Stop once corrections reach the twofold level or stop shrinking.
      if (stepNorm <= eps * eps * solNorm || stepNorm >= Scalar(0.5) * lastNorm) break;
      lastNorm = stepNorm;
    }
  }

  /// Slopes, intercept (twofold), residual norm and SST from the final solution.
  void finishFromSolution(Eigen::Index n, Eigen::Index k, WorkspaceType& ws) const {
    ws.b = m_sol.segment(m_offset, k) + m_solLo.segment(m_offset, k);
    if (m_offset == 1) {
      detail::Twofold<Scalar> b0;
      b0.add(ws.ybar);
      b0.add(m_sol(0));
      b0.add(m_solLo(0));
      for (Eigen::Index j = 0; j < k; ++j) {
        b0.addProduct(ws.xbar(j), -m_sol(j + 1));
        b0.addProduct(ws.xbar(j), -m_solLo(j + 1));
      }
      ws.intercept = b0.value();
    } else {
      ws.intercept = Scalar(0);
    }
    detail::Twofold<Scalar> sse, syy, sy;
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar om = m_f(i);
      detail::Twofold<Scalar> e = rhsEntry(i, om, ws);
      for (Eigen::Index c = 0; c < m_offset + k; ++c) {
        const detail::Twofold<Scalar> a = designEntry(i, c, om, ws);
        e.addProduct(a, -m_sol(c));
        e.lo -= a.hi * m_solLo(c);
      }
      const Scalar ev = e.value();
      sse.addProduct(ev, ev);
      const detail::Twofold<Scalar> yc = rhsEntry(i, om, ws);
      const Scalar yv = yc.value();
      syy.addProduct(yv, yv);
      sy.addProduct(om, yv);
    }
    ws.rho = std::sqrt(sse.value());
    const Scalar mean = sy.value();
    ws.sst = m_offset == 1 ? syy.value() - mean * mean / ws.weight : syy.value();
  }

  Options m_options;
  Eigen::Index m_capacity;
  Eigen::Index m_n = 0;
  Eigen::Index m_head = 0;  ///< slot of the oldest row (nonzero only once a sliding window wrapped)
  /// Newest rows stored by add() but not yet committed to the centering (see syncCentering).
  mutable Eigen::Index m_pending = 0;
  RowMatrix m_x;
  Column m_y, m_w;
  // Solve-time workspace (not part of the state).
  mutable Design m_design;
  mutable Column m_qtb, m_r, m_f;
  mutable Vector1 m_tau, m_sol, m_solLo, m_dx, m_tmp;  // solution = m_sol + m_solLo (twofold)
  mutable Vector1 m_syncRow;  // syncCentering's centered row
  mutable Eigen::Index m_offset = 1;
  mutable int m_sweeps = 0;
};

}  // namespace rowfold
