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
  template <typename... Args>
  explicit Timed(SolverKind kind, const Args&... args) : Contender(kind), m_fit(args...) {}

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

/// The estimator itself, or a block window of it with --window.
template <typename Estimator>
std::unique_ptr<Contender> make(SolverKind kind, Eigen::Index k, typename Estimator::Options options,
                                const Settings& s) {
  static_cast<rowfold::FitOptions&>(options) = fitOptions(s);
  if (s.window > 0)
    return std::make_unique<Timed<rowfold::BlockWindow<Estimator>>>(
        kind, k, static_cast<Eigen::Index>(s.windowBlocks), static_cast<Eigen::Index>(windowBlockRows(s)), options);
  return std::make_unique<Timed<Estimator>>(kind, k, options);
}

template <typename Estimator>
class ReferenceFit final : public Reference::Fit {
 public:
  template <typename... Args>
  explicit ReferenceFit(const Args&... args) : m_fit(args...) {}
  void add(const Reference::Vector& x, Reference::Scalar y, Reference::Scalar w) override { (void)m_fit.add(x, y, w); }
  rowfold::Solution<Reference::Scalar, Eigen::Dynamic> solve() const override { return m_fit.solve(); }

 private:
  Estimator m_fit;
};

}  // namespace

std::unique_ptr<Contender> makeContender(SolverKind kind, Eigen::Index k, const Settings& s) {
  constexpr int D = Eigen::Dynamic;
  switch (kind) {
    case SolverKind::batch_qr: {
      rowfold::BatchQrOptions o;
      static_cast<rowfold::FitOptions&>(o) = fitOptions(s);
      o.capacity = static_cast<Eigen::Index>(s.capacity);
      if (s.window > 0) {  // a ring of exactly W = B b rows: the block windows' complete blocks
        o.capacity = static_cast<Eigen::Index>(s.windowBlocks * windowBlockRows(s));
        o.slide = true;
      }
      return std::make_unique<Timed<rowfold::BatchQr<double, D>>>(kind, k, o);
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

Reference::Reference(Eigen::Index k, const Settings& s) : m_x(k) {
  using Plain = rowfold::GivensQr<Scalar, Eigen::Dynamic>;
  rowfold::GivensQrOptions o;
  static_cast<rowfold::FitOptions&>(o) = fitOptions(s);
  if (s.window > 0)
    m_fit = std::make_unique<ReferenceFit<rowfold::BlockWindow<Plain>>>(
        k, static_cast<Eigen::Index>(s.windowBlocks), static_cast<Eigen::Index>(windowBlockRows(s)), o);
  else
    m_fit = std::make_unique<ReferenceFit<Plain>>(k, o);
}

Reference::~Reference() = default;

void Reference::fold(const Block& b) {
  for (Eigen::Index i = 0; i < b.rows; ++i) {
    m_x = b.x.row(i).transpose().cast<Scalar>();
    m_fit->add(m_x, static_cast<Scalar>(b.y(i)), static_cast<Scalar>(b.w(i)));
  }
}

bool Reference::solve(Vector& coefficients, Scalar& intercept) const {
  const auto sol = m_fit->solve();
  coefficients = sol.coefficients;
  intercept = sol.intercept;
  return sol.status == rowfold::Status::ok;
}

int Reference::precisionBits() {
  return std::numeric_limits<Scalar>::digits;
}

}  // namespace rowfold_compare
