// Consumer of an installed (or add_subdirectory'd) rowfold: fits a few invented samples with
// rowfold::GivensQr<double, 2> and exits nonzero unless it recovers the invented coefficients.
#include <cmath>
#include <cstdio>

#include <Eigen/Core>
#include <rowfold/givens_qr.hpp>

int main() {
  // Invented, noise-free samples of y = 1.5 + 2 x1 - 0.75 x2.
  const double x1[] = {0.0, 1.0, 2.0, 3.0, 4.0, 5.0};
  const double x2[] = {1.0, -2.0, 0.5, 4.0, 3.0, -1.0};
  rowfold::GivensQr<double, 2> fit;
  for (int i = 0; i < 6; ++i) {
    const double y = 1.5 + 2.0 * x1[i] - 0.75 * x2[i];
    if (fit.add(Eigen::Vector2d(x1[i], x2[i]), y) != rowfold::Status::ok) {
      std::printf("sample %d rejected\n", i);
      return 1;
    }
  }
  const auto sol = fit.solve();
  std::printf("b0 = %.15g, b1 = %.15g, b2 = %.15g (status %s)\n", sol.intercept, sol.coefficients(0),
              sol.coefficients(1), rowfold::nameOf(sol.status));
  const bool ok = sol.status == rowfold::Status::ok && std::fabs(sol.coefficients(0) - 2.0) < 1e-12 &&
                  std::fabs(sol.coefficients(1) + 0.75) < 1e-12 && std::fabs(sol.intercept - 1.5) < 1e-12;
  return ok ? 0 : 1;
}
