// Plain alternatives the rowfold estimators are measured against. Each solves the same
// problem (K slopes and an intercept) the ordinary way: the intercept is a column of ones,
// so the states are one column wider than rowfold's centered ones.
#pragma once

#include <Eigen/Cholesky>
#include <Eigen/Core>
#include <Eigen/QR>
#include <cmath>

namespace rowfold_bench {

constexpr int plus(int k, int d) { return k == Eigen::Dynamic ? Eigen::Dynamic : k + d; }

/// P-form RLS exactly as a textbook writes it, with dynamic matrices and temporaries.
template <typename S>
class TextbookRls {
  using Mat = Eigen::Matrix<S, Eigen::Dynamic, Eigen::Dynamic>;
  using Vec = Eigen::Matrix<S, Eigen::Dynamic, 1>;

 public:
  TextbookRls(int k, S lambda) : m_k(k), m_lambda(lambda), m_P(Mat::Identity(k + 1, k + 1) * S(1e3)), m_theta(Vec::Zero(k + 1)) {}
  bool add(const S* x, S y) {
    Vec phi(m_k + 1);
    phi << S(1), Eigen::Map<const Vec>(x, m_k);
    Vec Pphi = m_P * phi;
    Vec gain = Pphi / (m_lambda + phi.dot(Pphi));
    m_theta = m_theta + gain * (y - phi.dot(m_theta));
    m_P = (m_P - gain * Pphi.transpose()) / m_lambda;
    return true;
  }
  const Vec& theta() const { return m_theta; }

 private:
  int m_k;
  S m_lambda;
  Mat m_P;
  Vec m_theta;
};

/// P-form RLS with fixed-size matrices, no temporaries, full symmetric P.
template <typename S, int K>
class PlainRls {
  static constexpr int N = K + 1;
  using Vec = Eigen::Matrix<S, N, 1>;

 public:
  PlainRls(int, S lambda) : m_lambda(lambda) {
    m_P.setIdentity();
    m_P *= S(1e3);
    m_theta.setZero();
  }
  bool add(const S* x, S y) {
    m_phi(0) = S(1);
    m_phi.template tail<K>() = Eigen::Map<const Eigen::Matrix<S, K, 1>>(x);
    m_g.noalias() = m_P * m_phi;
    const S alpha = m_lambda + m_phi.dot(m_g);
    const S e = y - m_phi.dot(m_theta);
    m_theta += (e / alpha) * m_g;
    m_P.noalias() -= (m_g / alpha) * m_g.transpose();
    m_P /= m_lambda;
    return true;
  }
  const Vec& theta() const { return m_theta; }

 private:
  S m_lambda;
  Eigen::Matrix<S, N, N> m_P;
  Vec m_theta, m_phi, m_g;
};

/// Givens row fold into the row-major triangle [R z; 0 rho] of [1 x y]: one sqrt and one
/// divide per column.
template <typename S, int K>
class PlainGivens {
  static constexpr int N = plus(K, 2);

 public:
  explicit PlainGivens(int k) : m_R(Eigen::Matrix<S, N, N, Eigen::RowMajor>::Zero(k + 2, k + 2)), m_v(k + 2), m_k(k) {}
  bool add(const S* x, S y) {
    const int n = m_k + 2;
    m_v(0) = S(1);
    m_v.segment(1, m_k) = Eigen::Map<const Eigen::Matrix<S, K, 1>>(x, m_k);
    m_v(n - 1) = y;
    for (int i = 0; i < n; ++i) {
      const S a = m_R(i, i), b = m_v(i);
      if (b == S(0)) continue;
      const S r = std::sqrt(a * a + b * b);
      const S inv = S(1) / r;
      const S c = a * inv, s = b * inv;
      m_R(i, i) = r;
      S* Ri = &m_R(i, 0);
      for (int j = i + 1; j < n; ++j) {
        const S rij = Ri[j], vj = m_v(j);
        Ri[j] = c * rij + s * vj;
        m_v(j) = c * vj - s * rij;
      }
    }
    return true;
  }
  /// Coefficients [b0; b] by back substitution.
  template <typename V>
  void solve(V& out) const {
    const int p = m_k + 1;
    out = m_R.topLeftCorner(p, p).template triangularView<Eigen::Upper>().solve(m_R.col(p).head(p));
  }

 private:
  Eigen::Matrix<S, N, N, Eigen::RowMajor> m_R;
  Eigen::Matrix<S, N, 1> m_v;
  int m_k;
};

/// Normal-equation accumulation G += v v' with v = [1 x y] (fixed size). `Lower` folds only the
/// lower triangle with a plain loop; otherwise the full outer product.
template <typename S, int K, bool Lower>
class PlainRank1 {
  static constexpr int N = K + 2;
  static constexpr int P = K + 1;

 public:
  explicit PlainRank1(int) { m_G.setZero(); }
  bool add(const S* x, S y) {
    m_v(0) = S(1);
    m_v.template segment<K>(1) = Eigen::Map<const Eigen::Matrix<S, K, 1>>(x);
    m_v(N - 1) = y;
    if constexpr (Lower) {
      for (int j = 0; j < N; ++j)
        for (int i = j; i < N; ++i) m_G(i, j) += m_v(i) * m_v(j);
    } else {
      m_G.noalias() += m_v * m_v.transpose();
    }
    return true;
  }
  /// Coefficients [b0; b] by LDLT of the leading block.
  template <typename V>
  void solve(V& out) {
    m_ldlt.compute(m_G.template topLeftCorner<P, P>());
    out = m_ldlt.solve(m_G.template block<1, P>(P, 0).transpose());
  }

 private:
  Eigen::Matrix<S, N, N> m_G;
  Eigen::Matrix<S, N, 1> m_v;
  Eigen::LDLT<Eigen::Matrix<S, P, P>, Eigen::Lower> m_ldlt;
};

/// Keeps rows in a row-major buffer; starts over when full.
template <typename S, int K>
class PlainStore {
 public:
  PlainStore(int k, Eigen::Index capacity) : m_X(capacity, k), m_y(capacity), m_k(k) {}
  bool add(const S* x, S y) {
    if (m_n == m_X.rows()) m_n = 0;
    m_X.row(m_n) = Eigen::Map<const Eigen::Matrix<S, 1, K>>(x, m_k);
    m_y(m_n++) = y;
    return true;
  }

 private:
  Eigen::Matrix<S, Eigen::Dynamic, K, (K == 1 ? Eigen::ColMajor : Eigen::RowMajor)> m_X;
  Eigen::Matrix<S, Eigen::Dynamic, 1> m_y;
  int m_k;
  Eigen::Index m_n = 0;
};

/// Sliding window of the last `window` rows, refitted by Eigen's HouseholderQR after every
/// sample.
template <typename S>
class WindowRefit {
  using Mat = Eigen::Matrix<S, Eigen::Dynamic, Eigen::Dynamic>;
  using Vec = Eigen::Matrix<S, Eigen::Dynamic, 1>;

 public:
  WindowRefit(int k, Eigen::Index window) : m_A(Mat::Zero(window, k + 1)), m_y(Vec::Zero(window)), m_qr(window, k + 1), m_b(k + 1), m_k(k) {
    m_A.col(0).setOnes();
  }
  bool add(const S* x, S y) {
    m_A.row(m_next).tail(m_k) = Eigen::Map<const Eigen::Matrix<S, 1, Eigen::Dynamic>>(x, m_k);
    m_y(m_next) = y;
    if (++m_next == m_A.rows()) m_next = 0;
    m_qr.compute(m_A);
    m_b = m_qr.solve(m_y);
    return true;
  }
  const Vec& coefficients() const { return m_b; }

 private:
  Mat m_A;
  Vec m_y;
  Eigen::HouseholderQR<Mat> m_qr;
  Vec m_b;
  int m_k;
  Eigen::Index m_next = 0;
};

}  // namespace rowfold_bench
