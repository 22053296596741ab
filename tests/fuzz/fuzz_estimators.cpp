// libFuzzer target: arbitrary byte streams drive every estimator (float and double, fixed K = 3,
// and a dynamic K): options, samples, weights and queries come from the input. Asserts: no crash
// or undefined behaviour (run under ASan/UBSan), a refused sample leaves the state bit-identical,
// and solve() never returns non-finite coefficients without a flag or status saying why. The
// input also switches on the guards (outlier gate, Huber, regularization, variable forgetting,
// change alarm) and drives addRows, merge, relax, advance and addDelayed; a sample the outlier gate
// refuses must leave the snapshot image byte-identical (only the diagnostic counters change).
// A first byte >= 0xF0 drives MultiResponse (two responses) over each estimator instead,
// including its blocked addRows and a snapshot/restore round trip of the state reached; a first
// byte in [0xE0, 0xF0) drives ForgettingRls with only P's lower triangle kept (k = 20 and 40).
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <vector>

#include "rowfold/rowfold.hpp"

namespace {

struct Input {
  const std::uint8_t* p;
  std::size_t n;
  template <typename T>
  bool take(T& v) {
    if (n < sizeof(T)) return false;
    std::memcpy(&v, p, sizeof(T));
    p += sizeof(T);
    n -= sizeof(T);
    return true;
  }
};

void require(bool ok) {
  if (!ok) std::abort();
}

template <typename Est>
std::vector<unsigned char> image(const Est& est) {
  std::vector<unsigned char> buf(est.snapshotSize());
  std::size_t n = 0;
  require(est.snapshot(buf.data(), buf.size(), n) == rowfold::Status::ok);
  return buf;
}

// The head of every stream: a configuration byte (bit 0: no intercept; the other bits are the
// caller's) and the forgetting factor, into o.
template <typename Options>
bool readOptions(Input& in, std::uint8_t& cfg, Options& o) {
  double lambda = 1;
  if (!in.take(cfg) || !in.take(lambda)) return false;
  o.forgetting = lambda;
  o.intercept = (cfg & 1) ? rowfold::Intercept::none : rowfold::Intercept::fit;
  return true;
}

// The ops every single-response stream shares: relax, advance, the queries (solve() never
// returns non-finite coefficients without a status or flag saying why) and reset.
template <typename Est, typename XD>
void relaxAdvanceQueryReset(Est& est, std::uint8_t op, const XD& x) {
  using Scalar = typename Est::Scalar;
  if ((op & 0x0E) == 0x0A) (void)est.relax(static_cast<Scalar>(0.5));
  if ((op & 0x0E) == 0x0C) (void)est.advance(op >> 4);
  if ((op & 0x30) == 0x30) {
    const auto sol = est.solve();
    if (sol.status == rowfold::Status::ok && !sol.flags.any()) require(sol.coefficients.allFinite());
    (void)est.summarize(Scalar(0.95));
    (void)est.conditioning();
    (void)est.predictionInterval(x, Scalar(0.9));
  }
  if ((op & 0xC0) == 0xC0) est.reset();
}

template <typename Est>
void exercise(Est& est, Input& in) {
  using Scalar = typename Est::Scalar;
  Eigen::Matrix<Scalar, 3, 1> x;
  std::uint8_t op = 0;
  while (in.take(op)) {
    Scalar y = 0, w = 1;
    if (!in.take(x(0)) || !in.take(x(1)) || !in.take(x(2)) || !in.take(y)) return;
    if (op & 1) {
      if (!in.take(w)) return;
    }
    // The image first: snapshot() may bring a deferred record up to date (BatchQr's centering),
    // which changes the object's bytes but not its state; then the bytes a refusal must keep.
    const std::vector<unsigned char> imageBefore = image(est);
    unsigned char before[sizeof(Est)];
    std::memcpy(before, static_cast<const void*>(&est), sizeof(Est));
    const bool late = (op & 0x0E) == 0x0E;
    const rowfold::Status s = late ? est.addDelayed(x, y, op >> 4, w) : est.add(x, y, w);
    if (s == rowfold::Status::outlier)
      require(image(est) == imageBefore);  // scratch and counters may change, the state may not
    else if (s != rowfold::Status::ok)
      require(std::memcmp(before, static_cast<const void*>(&est), sizeof(Est)) == 0);
    if ((op & 0x0E) == 0x02) {  // a block of three rows: all-or-nothing, so a refusal keeps the image
      Eigen::Matrix<Scalar, 3, 3> X;
      Eigen::Matrix<Scalar, 3, 1> yr, wr;
      for (Eigen::Index i = 0; i < 3; ++i)
        if (!in.take(X(i, 0)) || !in.take(X(i, 1)) || !in.take(X(i, 2)) || !in.take(yr(i)) || !in.take(wr(i))) return;
      const std::vector<unsigned char> blockBefore = image(est);
      const rowfold::Status sb = (op & 1) ? est.addRows(X, yr, wr) : est.addRows(X, yr);
      if (sb != rowfold::Status::ok) require(image(est) == blockBefore);
    }
    if ((op & 0x0E) == 0x06) {
      Est part = est;  // merge a copy of the current state into itself (ages double)
      (void)est.merge(part);
    }
    relaxAdvanceQueryReset(est, op, x);
  }
}

template <template <typename, int, int> class E, typename Scalar>
void run(const std::uint8_t* data, std::size_t size) {
  Input in{data, size};
  std::uint8_t cfg = 0;
  typename E<Scalar, 3, 3>::Options o;
  if (!readOptions(in, cfg, o)) return;
  if constexpr (E<Scalar, 3, 3>::guardable) {
    o.outliers.enabled = (cfg & 2) != 0;
    o.outliers.warmup = 3;
    o.outliers.lockoutLimit = 2;
    o.outliers.huber = (cfg & 4) != 0;
    o.windup.regularization = (cfg & 8) != 0 ? 1e-3 : 0.0;
    o.windup.variableForgetting = (cfg & 16) != 0;
    o.windup.changeThreshold = (cfg & 32) != 0 ? 3.0 : 0.0;
  }
  E<Scalar, 3, 3> est(o);
  exercise(est, in);
}

template <typename S, int K, int M>
using Batch = rowfold::BatchQr<S, K, 64, M>;

// MultiResponse (two responses) over each estimator: the same checks through its own interface,
// with the windup guard (the only guard it runs) following lambda.
template <typename Single>
void runMulti(const std::uint8_t* data, std::size_t size) {
  using Scalar = typename Single::Scalar;
  using Multi = rowfold::MultiResponse<Single, 2>;
  Input in{data, size};
  std::uint8_t cfg = 0;
  typename Single::Options o;
  if (!readOptions(in, cfg, o)) return;
  o.windup.enabled = (cfg & 2) == 0;
  Multi est(o);
  Eigen::Matrix<Scalar, 3, 1> x;
  Eigen::Matrix<Scalar, 2, 1> y;
  Eigen::Matrix<Scalar, 3, 2> B;
  Eigen::Matrix<Scalar, 2, 1> b0;
  rowfold::Flags flags;
  std::uint8_t op = 0;
  while (in.take(op)) {
    Scalar w = 1;
    if (!in.take(x(0)) || !in.take(x(1)) || !in.take(x(2)) || !in.take(y(0)) || !in.take(y(1))) return;
    if (op & 1) {
      if (!in.take(w)) return;
    }
    const std::vector<unsigned char> imageBefore = image(est);
    const bool late = (op & 0x0E) == 0x0E;
    const rowfold::Status s = late ? est.addDelayed(x, y, op >> 4, w) : est.add(x, y, w);
    if (s != rowfold::Status::ok) require(image(est) == imageBefore);
    if ((op & 0x0E) == 0x02) {  // a block of three rows, all-or-nothing
      Eigen::Matrix<Scalar, 3, 3> X;
      Eigen::Matrix<Scalar, 3, 2> Y;
      Eigen::Matrix<Scalar, 3, 1> wr;
      for (Eigen::Index i = 0; i < 3; ++i)
        if (!in.take(X(i, 0)) || !in.take(X(i, 1)) || !in.take(X(i, 2)) || !in.take(Y(i, 0)) || !in.take(Y(i, 1)) ||
            !in.take(wr(i)))
          return;
      const std::vector<unsigned char> blockBefore = image(est);
      const rowfold::Status sb = (op & 1) ? est.addRows(X, Y, wr) : est.addRows(X, Y);
      if (sb != rowfold::Status::ok) require(image(est) == blockBefore);
    }
    // The image restores into a fresh object and into the object itself, bytes equal.
    if ((op & 0x0E) == 0x04 && est.status() == rowfold::Status::ok) {
      const std::vector<unsigned char> now = image(est);
      Multi fresh(o);
      require(fresh.restore(now.data(), now.size()) == rowfold::Status::ok && image(fresh) == now);
      require(est.restore(now.data(), now.size()) == rowfold::Status::ok && image(est) == now);
      std::vector<unsigned char> bent = now;  // one flipped bit: refused, state untouched
      bent[(op >> 4) % bent.size()] ^= 0x10;
      require(est.restore(bent.data(), bent.size()) != rowfold::Status::ok && image(est) == now);
    }
    if ((op & 0x0E) == 0x06) {
      Multi part = est;
      (void)est.merge(part);
    }
    if ((op & 0x0E) == 0x0A) (void)est.relax(static_cast<Scalar>(0.5));
    if ((op & 0x0E) == 0x0C) (void)est.advance(op >> 4);
    if ((op & 0x30) == 0x30) {
      (void)est.solveInto(B, b0, flags);
      for (Eigen::Index j = 0; j < 2; ++j) {
        const auto sol = est.response(j).solve();
        if (sol.status == rowfold::Status::ok && !sol.flags.any()) require(sol.coefficients.allFinite());
        (void)est.response(j).summarize(Scalar(0.95));
        (void)est.response(j).predictionInterval(x, Scalar(0.9));
      }
    }
    if ((op & 0xC0) == 0xC0) est.reset();
  }
}

// ForgettingRls above kBothTrianglesUpTo (only P's lower triangle kept): double k = 20, float
// k = 40, dynamic K, started from a prior so that the recursion runs from the first sample. Each
// sample takes k signed bytes (x_j = byte / 16) and y; guards and queries as in run().
template <typename Scalar>
void runWide(const std::uint8_t* data, std::size_t size, Eigen::Index k) {
  using E = rowfold::ForgettingRls<Scalar, Eigen::Dynamic>;
  Input in{data, size};
  std::uint8_t cfg = 0;
  typename E::Options o;
  if (!readOptions(in, cfg, o)) return;
  o.start = rowfold::RlsStart::prior;
  o.outliers.enabled = (cfg & 2) != 0;
  o.outliers.warmup = 3;
  o.outliers.huber = (cfg & 4) != 0;
  o.windup.variableForgetting = (cfg & 16) != 0;
  E est(k, o);
  require(k > E::kBothTrianglesUpTo);
  typename E::Vector x(k);
  std::uint8_t op = 0;
  while (in.take(op)) {
    for (Eigen::Index j = 0; j < k; ++j) {
      std::int8_t b = 0;
      if (!in.take(b)) return;
      x(j) = Scalar(b) / Scalar(16);
    }
    Scalar y = 0;
    if (!in.take(y)) return;
    const std::vector<unsigned char> imageBefore = image(est);
    const rowfold::Status st = est.add(x, y);
    if (st != rowfold::Status::ok) require(image(est) == imageBefore);
    relaxAdvanceQueryReset(est, op, x);
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size < 1) return 0;
  if (data[0] >= 0xE0 && data[0] < 0xF0) {  // ForgettingRls, lower triangle only
    if (data[0] & 1)
      runWide<float>(data + 1, size - 1, 40);
    else
      runWide<double>(data + 1, size - 1, 20);
    return 0;
  }
  if (data[0] >= 0xF0) {  // MultiResponse
    switch (data[0] % 4) {
      case 0: runMulti<rowfold::GivensQr<double, 3>>(data + 1, size - 1); break;
      case 1: runMulti<rowfold::NormalEquations<double, 3>>(data + 1, size - 1); break;
      case 2: runMulti<rowfold::ForgettingRls<float, 3>>(data + 1, size - 1); break;
      default: runMulti<rowfold::BatchQr<double, 3, 64>>(data + 1, size - 1); break;
    }
    return 0;
  }
  switch (data[0] % 8) {
    case 0: run<Batch, double>(data + 1, size - 1); break;
    case 1: run<rowfold::GivensQr, double>(data + 1, size - 1); break;
    case 2: run<rowfold::NormalEquations, double>(data + 1, size - 1); break;
    case 3: run<rowfold::ForgettingRls, double>(data + 1, size - 1); break;
    case 4: run<Batch, float>(data + 1, size - 1); break;
    case 5: run<rowfold::GivensQr, float>(data + 1, size - 1); break;
    case 6: run<rowfold::NormalEquations, float>(data + 1, size - 1); break;
    default: run<rowfold::ForgettingRls, float>(data + 1, size - 1); break;
  }
  return 0;
}
