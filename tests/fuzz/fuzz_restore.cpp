// libFuzzer target: restore() of arbitrary images into every estimator must either refuse with
// a Status and leave the state untouched, or succeed and leave a state that snapshots back to
// the very same image and keeps working (add + solve without crashing).
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <vector>

#include "rowfold/rowfold.hpp"

namespace {

void require(bool ok) {
  if (!ok) std::abort();
}

template <typename Est>
void probe(const std::uint8_t* data, std::size_t size) {
  using Scalar = typename Est::Scalar;
  Est est;
  const Eigen::Matrix<Scalar, 2, 1> x(Scalar(1), Scalar(2));
  (void)est.add(x, Scalar(3));
  unsigned char before[sizeof(Est)];
  std::memcpy(before, static_cast<const void*>(&est), sizeof(Est));
  const rowfold::Status s = est.restore(data, size);
  if (s != rowfold::Status::ok) {
    require(std::memcmp(before, static_cast<const void*>(&est), sizeof(Est)) == 0);
    return;
  }
  std::vector<unsigned char> again(est.snapshotSize());
  std::size_t written = 0;
  require(est.snapshot(again.data(), again.size(), written) == rowfold::Status::ok);
  require(written == size && std::memcmp(again.data(), data, size) == 0);
  (void)est.add(x, Scalar(1));
  (void)est.solve();
  (void)est.summarize();
}

// MultiResponse images: the same contract through its own header and per-response parts.
template <typename Est>
void probeMulti(const std::uint8_t* data, std::size_t size) {
  using Scalar = typename Est::Scalar;
  Est est;
  const Eigen::Matrix<Scalar, 2, 1> x(Scalar(1), Scalar(2)), y(Scalar(3), Scalar(4));
  (void)est.add(x, y);
  std::vector<unsigned char> before(est.snapshotSize());
  std::size_t n = 0;
  require(est.snapshot(before.data(), before.size(), n) == rowfold::Status::ok);
  const rowfold::Status s = est.restore(data, size);
  std::vector<unsigned char> again(est.snapshotSize());
  std::size_t written = 0;
  require(est.snapshot(again.data(), again.size(), written) == rowfold::Status::ok);
  if (s != rowfold::Status::ok) {
    require(again == before);
    return;
  }
  require(written == size && std::memcmp(again.data(), data, size) == 0);
  (void)est.add(x, y);
  (void)est.response(1).summarize();
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  probe<rowfold::GivensQr<double, 2>>(data, size);
  probe<rowfold::NormalEquations<double, 2>>(data, size);
  probe<rowfold::ForgettingRls<double, 2>>(data, size);
  probe<rowfold::BatchQr<double, 2, 16>>(data, size);
  probe<rowfold::GivensQr<float, 2>>(data, size);
  probeMulti<rowfold::MultiResponse<rowfold::GivensQr<double, 2>, 2>>(data, size);
  probeMulti<rowfold::MultiResponse<rowfold::ForgettingRls<double, 2>, 2>>(data, size);
  return 0;
}
