/// @file
/// BlockWindow: an exact sliding ("jumping") window for the factor estimators, built from
/// merged per-block states without downdating.
// Classic include guard (not #pragma once): the header also compiles as a main file.
#ifndef ROWFOLD_WINDOW_HPP
#define ROWFOLD_WINDOW_HPP

#include <Eigen/Core>
#include <array>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>
#include <vector>

#include "rowfold/estimator_base.hpp"
#include "rowfold/forgetting_rls.hpp"
#include "rowfold/givens_qr.hpp"
#include "rowfold/normal_equations.hpp"
#include "rowfold/snapshot.hpp"
#include "rowfold/status.hpp"

namespace rowfold {

/// Least squares over the most recent rows only, for GivensQr, NormalEquations or ForgettingRls
/// (`Estimator`), by the block ("jumping") window of NUMERICS §3: the rows go into blocks of b
/// rows, each block its own estimator state; the ring keeps the B most recent complete blocks
/// plus the block being filled. The window fit is the merge of the live blocks, oldest first
/// (stacked-factor QR for GivensQr, added co-moments for NormalEquations, factors rebuilt from P
/// for ForgettingRls; EstimatorBase::merge, NUMERICS §5: Demmel, Grigori, Hoemmen & Langou 2012
/// for the stacked factors, Chan, Golub & LeVeque 1979 for the centering). Dropping the oldest
/// block discards its state: no downdate, so nothing can lose definiteness.
/// ```
///   window = merge(block_oldest, ..., block_newest_complete, block_filling)
///   rows in the window: W + m,   W = B b,   m = rows of the filling block, 0 <= m < b.
/// ```
/// The window length therefore varies between W and W + b - 1 (NUMERICS §3: between W and W + b).
/// When a block completes, the oldest complete block is dropped at once, so right after every
/// b-th row the window holds exactly the last W rows. Under forgetting (lambda < 1) each row
/// keeps its weight lambda^age counted from the newest row (the merge ages the older states);
/// the equivalent exponential memory of a rectangular window of W rows is
/// lambda = (W - 1)/(W + 1) (NUMERICS §3).
///
/// **Accuracy and stability:** that of the block estimator on the rows in the window (the merge
/// is as stable as Householder QR for GivensQr; NormalEquations and ForgettingRls square the
/// condition number as they always do). The window fit equals a fresh fit of the same rows to
/// within rounding.
///
/// **Cost:** add = one add of the block estimator (GivensQr ~2 (K+1)^2 multiplies); the add that
/// completes a block also merges the B complete blocks once (B - 1 merges, each O(K^3) for
/// GivensQr and ForgettingRls, O(K^2) for NormalEquations). A query (solve, summarize,
/// conditioning, predict, predictionInterval, weightSum, effectiveCount) after new rows merges
/// the filling block into a copy of the merged complete blocks (one merge), then costs what the
/// estimator's query costs. Memory: B + 4 estimator states (B + 1 blocks,
/// the merged complete blocks, the window, a restore probe).
///
/// **Allocation:** fixed K and fixed Blocks allocate nothing, ever (the states live inside the
/// object); Eigen::Dynamic K or Blocks allocate in the constructor only. No exceptions.
///
/// **Status:** add/addRows return what the block estimator's add returns (`ok`,
/// `nonfinite_input`, `negative_weight`, `wrong_size`, `invalid_options`, `outlier`); a
/// rejected sample leaves the window untouched; addRows validates every row first (all or
/// nothing). The construction status is `invalid_options` for blocks < 1 or blockRows < 1 (or
/// a ForgettingRls prior start, whose prior would count once per block), `wrong_size` for a
/// blocks count that differs from a fixed `Blocks`. Queries give `empty` for an empty window and
/// `not_available` when a merge is refused (a ForgettingRls block whose P lost definiteness).
/// The windup guard and the outlier gate, if enabled in the options, act inside each block:
/// a new block starts them afresh (the gate's scale warms up again), so the gate only acts in
/// blocks longer than its warm-up.
///
/// **Snapshots:** snapshot/restore write and read the whole window: a header, then each live
/// block's own estimator image (oldest first), then a CRC-32 (layout at `snapshot`). A restored
/// window continues bit-identically.
///
/// Threads: queries use scratch states inside the object (one query at a time).
///
/// Includes the three estimator headers, so `#include <rowfold/window.hpp>` is enough to use it.
template <typename Estimator, int Blocks = Eigen::Dynamic>
class BlockWindow {
  static_assert(Estimator::kind != EstimatorKind::batch_qr,
                "rowfold: BatchQr has its own exact window (BatchQrOptions::slide)");
  static_assert(Blocks == Eigen::Dynamic || Blocks >= 1, "rowfold: Blocks must be positive or Eigen::Dynamic");

 public:
  using Scalar = typename Estimator::Scalar;
  using Options = typename Estimator::Options;
  using SolutionType = typename Estimator::SolutionType;
  using SummaryType = typename Estimator::SummaryType;
  using ConditioningType = typename Estimator::ConditioningType;
  using PredictionType = typename Estimator::PredictionType;
  using Vector = typename Estimator::Vector;
  static constexpr int K = Estimator::K;
  static constexpr int Slots = Blocks == Eigen::Dynamic ? Eigen::Dynamic : Blocks + 1;
  using Storage = std::conditional_t<Blocks == Eigen::Dynamic, std::vector<Estimator>,
                                     std::array<Estimator, (Slots > 0 ? Slots : 1)>>;

  /// Fixed K and fixed Blocks: the window of Blocks blocks of `blockRows` rows.
  explicit BlockWindow(Eigen::Index blockRows, const Options& options = Options())
      : BlockWindow(K == Eigen::Dynamic ? 0 : K, Blocks == Eigen::Dynamic ? 0 : Blocks, blockRows, options) {}

  /// Any K and Blocks (each must equal the compile-time value when that is fixed).
  BlockWindow(Eigen::Index k, Eigen::Index blocks, Eigen::Index blockRows, const Options& options)
      : m_merged(k, options),
        m_scratch(k, options),
        m_probe(k, options),
        m_blocks(makeStorage(blocks)),
        m_blockRows(blockRows),
        m_count(blocks) {
    for (Estimator& b : m_blocks) b = m_merged;
    m_status = m_merged.status();
    if (m_status == Status::ok && (blocks < 1 || blockRows < 1)) m_status = Status::invalid_options;
    if (m_status == Status::ok && Blocks != Eigen::Dynamic && blocks != Blocks) m_status = Status::wrong_size;
    if constexpr (Estimator::kind == EstimatorKind::forgetting_rls)
      if (m_status == Status::ok && options.start != RlsStart::exact) m_status = Status::invalid_options;
  }

  /// Construction outcome; anything but `ok` makes add refuse.
  Status status() const { return m_status; }
  Eigen::Index regressors() const { return m_merged.regressors(); }
  /// B, the complete blocks kept.
  Eigen::Index blocks() const { return m_count; }
  /// b, rows per block.
  Eigen::Index blockRows() const { return m_blockRows; }
  /// W = B b: the window holds between W and W + b - 1 rows once that many have arrived.
  Eigen::Index windowLength() const { return m_count * m_blockRows; }
  /// Rows (accepted samples with weight > 0) in the window now.
  std::uint64_t count() const {
    std::uint64_t n = current().count();
    for (Eigen::Index i = 1; i <= m_live; ++i) n += block(-i).count();
    return n;
  }
  /// Rows in the block being filled (0 right after a block completed).
  std::uint64_t fillingRows() const { return current().count(); }
  /// Sum of the (forgotten) sample weights in the window.
  Scalar weightSum() const { return window().weightSum(); }
  /// Effective sample size F^2/F2 of the window (= count when lambda = 1).
  Scalar effectiveCount() const { return window().effectiveCount(); }

  /// Folds one sample into the filling block (same Status as the estimator's add; a rejected
  /// sample leaves the window untouched). When the block completes, the oldest block leaves.
  template <typename XD>
  Status add(const Eigen::MatrixBase<XD>& x, Scalar y, Scalar w = Scalar(1)) {
    if (m_status != Status::ok) return m_status;
    const Status s = current().add(x, y, w);
    if (s == Status::ok) afterAdd();
    return s;
  }
  /// Folds one sample from a raw array of K values.
  Status add(const Scalar* x, Scalar y, Scalar w = Scalar(1)) {
    if (x == nullptr) return Status::wrong_size;
    return add(Eigen::Map<const Vector>(x, regressors()), y, w);
  }

  /// Folds the rows of X (n x K) with responses y. All or nothing: every row is validated
  /// first; a row the outlier gate refuses is skipped (as in EstimatorBase::addRows).
  template <typename XD, typename YD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y) {
    return addRowsImpl(X, y, static_cast<const Vector*>(nullptr));
  }
  /// Weighted form of addRows.
  template <typename XD, typename YD, typename WD>
  Status addRows(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const Eigen::MatrixBase<WD>& w) {
    return addRowsImpl(X, y, &w);
  }

  /// Forgets every row (options kept).
  void reset() {
    for (Estimator& b : m_blocks) b.reset();
    m_merged.reset();
    m_scratch.reset();
    m_current = 0;
    m_live = 0;
    m_mergeStatus = Status::ok;
    m_fresh = false;
  }

  /// The fit of the window as an estimator state (built on demand; valid until the next
  /// non-const call). Every query of the estimator is available on it (crossProducts, ...).
  const Estimator& window() const {
    if (!m_fresh) build();
    return m_scratch;
  }

  SolutionType solve() const {
    SolutionType s(regressors());
    solveInto(s);
    return s;
  }
  Status solveInto(SolutionType& out) const {
    const Estimator& e = window();
    if (m_buildStatus != Status::ok) {
      out.coefficients.setZero(regressors());
      out.intercept = Scalar(0);
      out.rank = 0;
      out.flags = Flags();
      out.status = m_buildStatus;
      return out.status;
    }
    return e.solveInto(out);
  }
  SummaryType summarize(Scalar level = Scalar(0.95)) const {
    SummaryType s(regressors());
    summarizeInto(s, level);
    return s;
  }
  Status summarizeInto(SummaryType& out, Scalar level = Scalar(0.95)) const {
    const Estimator& e = window();
    if (m_buildStatus != Status::ok) return out.status = m_buildStatus;
    return e.summarizeInto(out, level);
  }
  ConditioningType conditioning() const {
    ConditioningType c(regressors());
    conditioningInto(c);
    return c;
  }
  Status conditioningInto(ConditioningType& out) const {
    const Estimator& e = window();
    if (m_buildStatus != Status::ok) return out.status = m_buildStatus;
    return e.conditioningInto(out);
  }
  template <typename XD>
  Scalar predict(const Eigen::MatrixBase<XD>& x0) const {
    const Estimator& e = window();
    if (m_buildStatus != Status::ok) return std::numeric_limits<Scalar>::quiet_NaN();
    return e.predict(x0);
  }
  template <typename XD>
  PredictionType predictionInterval(const Eigen::MatrixBase<XD>& x0, Scalar level = Scalar(0.95)) const {
    const Estimator& e = window();
    if (m_buildStatus != Status::ok) {
      PredictionType p;
      p.status = m_buildStatus;
      return p;
    }
    return e.predictionInterval(x0, level);
  }

  /// Size in bytes of the image snapshot() writes now.
  std::size_t snapshotSize() const {
    std::size_t n = kHeader + 4;
    for (Eigen::Index i = m_live; i >= 0; --i) n += 4 + block(-i).snapshotSize();
    return n;
  }

  /// Writes the window to `buffer`:
  /// ```
  ///   offset size field
  ///    0     4    magic "RFBW"
  ///    4     2    format version (1)
  ///    6     2    reserved (0)
  ///    8     8    B (blocks)
  ///   16     8    b (rows per block)
  ///   24     8    live complete blocks L (0..B)
  ///   32     ...  L + 1 block images, oldest complete block first, the filling block last;
  ///               each as a 4-byte length and the estimator's own snapshot image
  ///   end-4  4    CRC-32 of everything before it (native byte order, as snapshot.hpp)
  /// ```
  /// `buffer_too_small` if it does not fit (nothing written). Never allocates.
  Status snapshot(unsigned char* buffer, std::size_t capacity, std::size_t& written) const {
    written = 0;
    if (m_status != Status::ok) return m_status;
    const std::size_t size = snapshotSize();
    if (buffer == nullptr || capacity < size) return Status::buffer_too_small;
    std::memset(buffer, 0, kHeader);
    const unsigned char magic[4] = {'R', 'F', 'B', 'W'};
    std::memcpy(buffer, magic, sizeof magic);
    detail::putField(buffer + 4, kVersion);
    detail::putField(buffer + 8, static_cast<std::uint64_t>(m_count));
    detail::putField(buffer + 16, static_cast<std::uint64_t>(m_blockRows));
    detail::putField(buffer + 24, static_cast<std::uint64_t>(m_live));
    std::size_t at = kHeader;
    for (Eigen::Index i = m_live; i >= 0; --i) {
      std::size_t used = 0;
      const Status s = block(-i).snapshot(buffer + at + 4, size - at - 4, used);
      if (s != Status::ok) return s;
      detail::putField(buffer + at, static_cast<std::uint32_t>(used));
      at += 4 + used;
    }
    detail::putField(buffer + at, detail::crc32(buffer, at));
    written = at + 4;
    return Status::ok;
  }

  /// Restores a window written by snapshot() of a window with the same estimator, options, B
  /// and b. `corrupt_image` (truncated, damaged, inconsistent) or `image_mismatch` (another
  /// window or estimator): the window is untouched. Every block image is checked (restored into
  /// a scratch state) before any block changes. Never allocates.
  Status restore(const unsigned char* image, std::size_t length) {
    if (m_status != Status::ok) return m_status;
    if (image == nullptr || length < kHeader + 4 || std::memcmp(image, "RFBW", 4) != 0) return Status::corrupt_image;
    if (detail::crc32(image, length - 4) != detail::getField<std::uint32_t>(image + length - 4))
      return Status::corrupt_image;
    if (detail::getField<std::uint16_t>(image + 4) != kVersion ||
        detail::getField<std::uint64_t>(image + 8) != static_cast<std::uint64_t>(m_count) ||
        detail::getField<std::uint64_t>(image + 16) != static_cast<std::uint64_t>(m_blockRows))
      return Status::image_mismatch;
    const std::uint64_t live = detail::getField<std::uint64_t>(image + 24);
    if (live > static_cast<std::uint64_t>(m_count)) return Status::corrupt_image;
    // Pass 1 checks every block image (and the block sizes); pass 2 applies them.
    for (int pass = 0; pass < 2; ++pass) {
      std::size_t at = kHeader;
      for (std::uint64_t i = 0; i <= live; ++i) {
        if (at + 4 > length - 4) return Status::corrupt_image;
        const std::size_t used = detail::getField<std::uint32_t>(image + at);
        if (used > length - 4 - at - 4) return Status::corrupt_image;
        Estimator& into = pass == 0 ? m_probe : m_blocks[static_cast<std::size_t>(i)];
        const Status s = into.restore(image + at + 4, used);
        if (s != Status::ok) return s;  // pass 0 only: pass 1 restores the images pass 0 accepted
        const std::uint64_t rows = into.count(), b = static_cast<std::uint64_t>(m_blockRows);
        if (pass == 0 && (i < live ? rows != b : rows >= b)) return Status::corrupt_image;
        at += 4 + used;
      }
      if (at != length - 4) return Status::corrupt_image;
    }
    for (Eigen::Index i = static_cast<Eigen::Index>(live) + 1; i < slots(); ++i)
      m_blocks[static_cast<std::size_t>(i)].reset();
    m_live = static_cast<Eigen::Index>(live);
    m_current = m_live;
    rebuildComplete();
    m_fresh = false;
    return Status::ok;
  }

 private:
  static constexpr std::size_t kHeader = 32;
  static constexpr std::uint16_t kVersion = 1;

  static Storage makeStorage(Eigen::Index blocks) {
    if constexpr (Blocks == Eigen::Dynamic) {
      return Storage(static_cast<std::size_t>(blocks > 0 ? blocks + 1 : 1));
    } else {
      static_cast<void>(blocks);
      return Storage();
    }
  }

  Eigen::Index slots() const { return static_cast<Eigen::Index>(m_blocks.size()); }
  /// Slot at offset `d` from the filling block (d = -1: newest complete block).
  Eigen::Index slotAt(Eigen::Index d) const {
    const Eigen::Index n = slots();
    return ((m_current + d) % n + n) % n;
  }
  Estimator& block(Eigen::Index d) { return m_blocks[static_cast<std::size_t>(slotAt(d))]; }
  const Estimator& block(Eigen::Index d) const { return m_blocks[static_cast<std::size_t>(slotAt(d))]; }
  Estimator& current() { return m_blocks[static_cast<std::size_t>(m_current)]; }
  const Estimator& current() const { return m_blocks[static_cast<std::size_t>(m_current)]; }

  /// After an accepted sample: a completed block joins the complete ones, the oldest leaves.
  void afterAdd() {
    m_fresh = false;
    if (current().count() < static_cast<std::uint64_t>(m_blockRows)) return;
    m_current = slotAt(1);
    if (m_live == m_count) {
      current().reset();  // the slot after the filling block holds the oldest complete block
    } else {
      ++m_live;
    }
    rebuildComplete();
  }

  /// m_merged = merge of the complete blocks, oldest first.
  void rebuildComplete() {
    m_mergeStatus = Status::ok;
    if (m_live == 0) {
      m_merged.reset();
      return;
    }
    m_merged = block(-m_live);
    for (Eigen::Index i = m_live - 1; i >= 1 && m_mergeStatus == Status::ok; --i)
      m_mergeStatus = m_merged.merge(block(-i));
  }

  /// m_scratch = m_merged + the filling block.
  void build() const {
    m_fresh = true;
    m_buildStatus = m_mergeStatus;
    if (m_live == 0) {
      m_scratch = current();
      return;
    }
    m_scratch = m_merged;
    if (m_buildStatus == Status::ok && current().count() != 0) m_buildStatus = m_scratch.merge(current());
  }

  template <typename XD, typename YD, typename WD>
  Status addRowsImpl(const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y, const WD* w) {
    static_assert(std::is_same<typename XD::Scalar, Scalar>::value, "rowfold: X must have the estimator's Scalar");
    if (m_status != Status::ok) return m_status;
    const Eigen::Index n = X.rows();
    if (X.cols() != regressors() || y.size() != n || (w != nullptr && w->size() != n)) return Status::wrong_size;
    for (Eigen::Index i = 0; i < n; ++i) {  // the order of EstimatorBase's checks
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      if (!(wi >= Scalar(0)) || !std::isfinite(wi)) return Status::negative_weight;
      if (!std::isfinite(Scalar(y(i))) || !X.row(i).allFinite()) return Status::nonfinite_input;
    }
    for (Eigen::Index i = 0; i < n; ++i) {
      const Scalar wi = w != nullptr ? Scalar((*w)(i)) : Scalar(1);
      const Status s = add(X.row(i).transpose(), Scalar(y(i)), wi);
      if (s != Status::ok && s != Status::outlier) return s;  // cannot happen after the checks
    }
    return Status::ok;
  }

  Estimator m_merged;           ///< merge of the complete blocks (rebuilt when a block completes)
  mutable Estimator m_scratch;  ///< the window: m_merged + the filling block (built on a query)
  Estimator m_probe;            ///< restore: checks each block image before anything changes
  Storage m_blocks;
  Eigen::Index m_blockRows;
  Eigen::Index m_count;        ///< B
  Eigen::Index m_current = 0;  ///< slot of the filling block
  Eigen::Index m_live = 0;     ///< complete blocks in the window (0..B)
  Status m_status = Status::ok;
  Status m_mergeStatus = Status::ok;
  mutable Status m_buildStatus = Status::ok;
  mutable bool m_fresh = false;
};

}  // namespace rowfold

#endif  // ROWFOLD_WINDOW_HPP
