// Instantiates every estimator so static analysis (scripts/analyze.sh) sees every member.
#include "rowfold/rowfold.hpp"
template class rowfold::GivensQr<double, 4>;
template class rowfold::GivensQr<float, Eigen::Dynamic>;
template class rowfold::NormalEquations<double, 4>;
template class rowfold::ForgettingRls<double, 4>;
template class rowfold::ForgettingRls<float, Eigen::Dynamic>;
template class rowfold::BatchQr<double, 4, 32>;
template class rowfold::BatchQr<float, Eigen::Dynamic>;
int main() {
  rowfold::GivensQr<double, 2> g;
  (void)g.add(Eigen::Vector2d(1, 2), 3.0);
  auto s = g.summarize();
  std::size_t w = 0;
  unsigned char buf[512];
  (void)g.snapshot(buf, sizeof buf, w);
  (void)g.restore(buf, w);
  return s.status == rowfold::Status::ok ? 0 : 1;
}
