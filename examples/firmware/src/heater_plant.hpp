// The simulated plant of the firmware example (an invented scenario, not a real device):
// an electrically heated block, temperature y in degC, heater duty u in percent, sampled at
// a fixed rate of 1 Hz. First-order thermal process tau dy/dt = -(y - T_amb) + G u, whose exact
// discretization is the ARX model
//     y_k = a y_{k-1} + b u_{k-1} + c + e_k,   a = exp(-h/tau), b = G (1 - a), c = T_amb (1 - a),
// with e_k a small equation disturbance (drafts, supply ripple). Everything here is
// deterministic: a xorshift32 generator, no <random>, no heap.
#pragma once

#include <cmath>
#include <cstdint>

namespace heater {

/// Marsaglia's xorshift32 (Journal of Statistical Software 8(14), 2003): period 2^32 - 1.
class Rng {
 public:
  explicit Rng(std::uint32_t seed) : m_state(seed != 0 ? seed : 0x9E3779B9u) {}
  std::uint32_t next() {
    m_state ^= m_state << 13;
    m_state ^= m_state >> 17;
    m_state ^= m_state << 5;
    return m_state;
  }
  /// Uniform on [0, 1) with 24 random bits (exact in float and double).
  template <typename S>
  S uniform() {
    return S(next() >> 8) * S(1.0 / 16777216.0);
  }
  /// Approximately standard normal: centred sum of four uniforms scaled to unit variance
  /// (Irwin-Hall; bounded by +-3.46, which is fine for a disturbance model).
  template <typename S>
  S gaussian() {
    const S sum = uniform<S>() + uniform<S>() + uniform<S>() + uniform<S>();
    return (sum - S(2)) * S(1.7320508075688772);
  }

 private:
  std::uint32_t m_state;
};

/// ARX parameters of the heater and the physical quantities they stand for (h = 1 s).
template <typename S>
struct Model {
  S a, b, c;
  S gain() const { return b / (S(1) - a); }               ///< G, degC per percent duty
  S ambient() const { return c / (S(1) - a); }            ///< T_amb, degC
  S timeConstant() const { return -S(1) / std::log(a); }  ///< tau, seconds
};

/// The process itself: advances one sample per call.
template <typename S>
class Plant {
 public:
  Plant(const Model<S>& model, S start, S disturbance, std::uint32_t seed)
      : m_model(model), m_y(start), m_sigma(disturbance), m_rng(seed) {}
  void setModel(const Model<S>& model) { m_model = model; }
  const Model<S>& model() const { return m_model; }
  S temperature() const { return m_y; }
  /// Applies duty u for one sample period; returns the new temperature.
  S step(S u) {
    m_y = m_model.a * m_y + m_model.b * u + m_model.c + m_sigma * m_rng.template gaussian<S>();
    return m_y;
  }

 private:
  Model<S> m_model;
  S m_y;
  S m_sigma;
  Rng m_rng;
};

/// Identification input: random duty levels in [10, 90] % held for 8..40 samples (a slow
/// random staircase, the usual "bump test" a commissioning engineer would run).
template <typename S>
class DutyProfile {
 public:
  explicit DutyProfile(std::uint32_t seed) : m_rng(seed) {}
  S next() {
    if (m_left == 0) {
      m_level = S(10) + S(80) * m_rng.template uniform<S>();
      m_left = 8 + m_rng.next() % 33u;
    }
    --m_left;
    return m_level;
  }

 private:
  Rng m_rng;
  S m_level = 0;
  std::uint32_t m_left = 0;
};

}  // namespace heater
