/// @file
/// Multi-threaded batch ingestion for hosts: fold row blocks on several threads, then merge.
///
/// This header is for servers and workstations, not firmware: it allocates (one estimator copy
/// per thread) and starts std::threads, so link with Threads::Threads (-pthread). The library's
/// other headers never include it.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <thread>
#include <vector>

#include "rowfold/status.hpp"

namespace rowfold {

namespace detail {

template <typename Estimator, typename XD, typename YD, typename WD>
Status addRowsParallelImpl(Estimator& est, const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y,
                           const Eigen::MatrixBase<WD>* w, unsigned threads) {
  const Eigen::Index n = X.rows();
  if (y.size() != n || (w != nullptr && w->size() != n)) return Status::wrong_size;
  const Eigen::Index parts = static_cast<Eigen::Index>(threads == 0 ? 1 : threads);
  // Below a few thousand rows per thread the copies and the merges cost more than they save.
  constexpr Eigen::Index kMinRowsPerThread = 4096;
  if (parts == 1 || n < 2 * kMinRowsPerThread) return w != nullptr ? est.addRows(X, y, *w) : est.addRows(X, y);

  // Block 0 goes into a copy of the current state, the others into empty copies; the blocks
  // are then merged in order, so ages under forgetting come out as for sequential folding.
  std::vector<Estimator> states(static_cast<std::size_t>(parts), est);
  std::vector<Status> results(static_cast<std::size_t>(parts), Status::ok);
  for (Eigen::Index p = 1; p < parts; ++p) states[static_cast<std::size_t>(p)].reset();
  auto work = [&](Eigen::Index p) {
    const Eigen::Index begin = n * p / parts, end = n * (p + 1) / parts;
    const auto rows = X.middleRows(begin, end - begin);
    const auto ys = y.segment(begin, end - begin);
    Estimator& s = states[static_cast<std::size_t>(p)];
    results[static_cast<std::size_t>(p)] =
        w != nullptr ? s.addRows(rows, ys, w->segment(begin, end - begin)) : s.addRows(rows, ys);
  };
  std::vector<std::thread> pool;
  pool.reserve(static_cast<std::size_t>(parts - 1));
  for (Eigen::Index p = 1; p < parts; ++p) pool.emplace_back(work, p);
  work(0);
  for (std::thread& t : pool) t.join();
  for (Status s : results)
    if (s != Status::ok) return s;  // the first rejecting block's reason; est is untouched
  for (Eigen::Index p = 1; p < parts; ++p) {
    const Status s = states[0].merge(states[static_cast<std::size_t>(p)]);
    if (s != Status::ok) return s;
  }
  est = states[0];
  return Status::ok;
}

}  // namespace detail

/// `est.addRows(X, y)` on up to `threads` threads: contiguous row blocks are folded into copies
/// of the estimator in parallel and merged in order (see EstimatorBase::merge), which gives the
/// same fit as sequential folding up to rounding, forgetting included (with lambda < 1 only when
/// the windup guard is off: its held steps depend on the state each row meets). All-or-nothing like
/// addRows: on any reject (the first failing block's Status) `est` is unchanged.
/// Allocates one estimator copy per thread; small batches (< 8192 rows) are folded directly.
template <typename Estimator, typename XD, typename YD>
Status addRowsParallel(Estimator& est, const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y,
                       unsigned threads = std::thread::hardware_concurrency()) {
  return detail::addRowsParallelImpl(est, X, y, static_cast<const Eigen::MatrixBase<YD>*>(nullptr), threads);
}

/// Weighted form (w has one weight per row).
template <typename Estimator, typename XD, typename YD, typename WD>
Status addRowsParallel(Estimator& est, const Eigen::MatrixBase<XD>& X, const Eigen::MatrixBase<YD>& y,
                       const Eigen::MatrixBase<WD>& w, unsigned threads = std::thread::hardware_concurrency()) {
  return detail::addRowsParallelImpl(est, X, y, &w, threads);
}

}  // namespace rowfold
