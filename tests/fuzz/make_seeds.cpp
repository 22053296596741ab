// Writes the seed corpus for the restore fuzzer: valid images of each estimator (so the fuzzer
// starts from inputs that pass the checksum). Run by the fuzz CMake step; output is committed.
#include <cstdio>
#include <vector>

#include "rowfold/rowfold.hpp"

template <typename Est>
void save(const Est& est, const char* dir, const char* name) {
  std::vector<unsigned char> image(est.snapshotSize());
  std::size_t written = 0;
  if (est.snapshot(image.data(), image.size(), written) != rowfold::Status::ok) return;
  char path[512];
  std::snprintf(path, sizeof path, "%s/%s", dir, name);
  if (FILE* f = std::fopen(path, "wb")) {
    std::fwrite(image.data(), 1, written, f);
    std::fclose(f);
  }
}

template <typename Est>
void write(const char* dir, const char* name) {
  Est est;
  for (int i = 0; i < 10; ++i) {
    const Eigen::Matrix<typename Est::Scalar, 2, 1> x(typename Est::Scalar(i), typename Est::Scalar(i * i % 7));
    (void)est.add(x, typename Est::Scalar(1 + 2 * i));
  }
  save(est, dir, name);
}

template <typename Est>
void writeMulti(const char* dir, const char* name) {
  using S = typename Est::Scalar;
  Est est;
  for (int i = 0; i < 10; ++i) {
    const Eigen::Matrix<S, 2, 1> x(S(i), S(i * i % 7)), y(S(1 + 2 * i), S(3 - i % 4));
    (void)est.add(x, y);
  }
  save(est, dir, name);
}

int main(int argc, char** argv) {
  const char* dir = argc > 1 ? argv[1] : ".";
  write<rowfold::GivensQr<double, 2>>(dir, "givens_double.img");
  write<rowfold::NormalEquations<double, 2>>(dir, "normal_double.img");
  write<rowfold::ForgettingRls<double, 2>>(dir, "rls_double.img");
  write<rowfold::BatchQr<double, 2, 16>>(dir, "batch_double.img");
  write<rowfold::GivensQr<float, 2>>(dir, "givens_float.img");
  writeMulti<rowfold::MultiResponse<rowfold::GivensQr<double, 2>, 2>>(dir, "multi_givens_double.img");
  writeMulti<rowfold::MultiResponse<rowfold::ForgettingRls<double, 2>, 2>>(dir, "multi_rls_double.img");
  return 0;
}
