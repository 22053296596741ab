// The four rowfold solvers (dynamic K) behind the Contender interface, and the reference.
#include "contender.hpp"

#include <chrono>
#include <limits>

namespace rowfold_compare {
namespace {

rowfold::FitOptions fitOptions(const Settings& s) {
  rowfold::FitOptions o;
  o.intercept = s.intercept ? rowfold::Intercept::fit : rowfold::Intercept::none;
  o.forgetting = s.forgetting;
  return o;
}

template <typename Estimator>
class Timed final : public Contender {
 public:
  Timed(SolverKind kind, Eigen::Index k, const typename Estimator::Options& options)
      : Contender(kind), m_fit(k, options) {}

  void fold(const Block& b, Eigen::Index from, Eigen::Index to) override {
    if (m_refusal != rowfold::Status::ok) {
      m_refused += static_cast<std::uint64_t>(to - from);
      return;
    }
    Eigen::Index i = from;
    const auto start = std::chrono::steady_clock::now();
    for (; i < to; ++i) {
      const rowfold::Status s = m_fit.add(b.x.row(i).transpose(), b.y(i), b.w(i));
      if (s != rowfold::Status::ok) {
        m_refusal = s;
        break;
      }
    }
    const auto stop = std::chrono::steady_clock::now();
    m_seconds += std::chrono::duration<double>(stop - start).count();
    m_folded += static_cast<std::uint64_t>(i - from);
    m_refused += static_cast<std::uint64_t>(to - i);
  }

  rowfold::Status summarize(Summary& out, double level) const override { return m_fit.summarizeInto(out, level); }

  double predict(const Eigen::Ref<const Eigen::VectorXd>& x) const override { return m_fit.predict(x); }

  rowfold::Status status() const override { return m_fit.status(); }

 private:
  Estimator m_fit;
};

template <typename Estimator>
std::unique_ptr<Contender> make(SolverKind kind, Eigen::Index k, typename Estimator::Options options,
                                const Settings& s) {
  static_cast<rowfold::FitOptions&>(options) = fitOptions(s);
  return std::make_unique<Timed<Estimator>>(kind, k, options);
}

}  // namespace

std::unique_ptr<Contender> makeContender(SolverKind kind, Eigen::Index k, const Settings& s) {
  constexpr int D = Eigen::Dynamic;
  switch (kind) {
    case SolverKind::batch_qr: {
      rowfold::BatchQrOptions o;
      o.capacity = static_cast<Eigen::Index>(s.capacity);
      return make<rowfold::BatchQr<double, D>>(kind, k, o, s);
    }
    case SolverKind::givens_qr:
      return make<rowfold::GivensQr<double, D>>(kind, k, {}, s);
    case SolverKind::normal_equations:
      return make<rowfold::NormalEquations<double, D>>(kind, k, {}, s);
    case SolverKind::forgetting_rls:
      return make<rowfold::ForgettingRls<double, D>>(kind, k, {}, s);
  }
  return nullptr;
}

Reference::Reference(Eigen::Index k, const Settings& s)
    : m_fit(k,
            [&s] {
              rowfold::GivensQrOptions o;
              static_cast<rowfold::FitOptions&>(o) = fitOptions(s);
              return o;
            }()),
      m_x(k) {}

void Reference::fold(const Block& b) {
  for (Eigen::Index i = 0; i < b.rows; ++i) {
    m_x = b.x.row(i).transpose().cast<Scalar>();
    (void)m_fit.add(m_x, static_cast<Scalar>(b.y(i)), static_cast<Scalar>(b.w(i)));
  }
}

bool Reference::solve(Vector& coefficients, Scalar& intercept) const {
  const auto sol = m_fit.solve();
  coefficients = sol.coefficients;
  intercept = sol.intercept;
  return sol.status == rowfold::Status::ok;
}

int Reference::precisionBits() {
  return std::numeric_limits<Scalar>::digits;
}

}  // namespace rowfold_compare
