// Snapshots: every estimator x Scalar x fixed/dynamic K. Reference for the checksum: the CRC-32
// check value of "123456789" is 0xCBF43926 (IEEE 802.3 / ISO-HDLC CRC, as catalogued in
// Williams 1993, "A painless guide to CRC error detection algorithms", and the reveng catalogue).
#include <doctest/doctest.h>

#include <cstring>
#include <random>
#include <vector>

#include "rowfold/rowfold.hpp"
#include "support/doctest_rowfold.hpp"

namespace {

using rowfold::Status;

template <template <typename, int, int> class E, typename S, bool Dyn>
struct Make {
  using Type = E<S, Dyn ? Eigen::Dynamic : 3, Dyn ? Eigen::Dynamic : 3>;
  using Scalar = S;
  static Type make(double lambda = 0.98) {
    typename Type::Options o;
    o.forgetting = lambda;
    return Type(3, o);
  }
};
template <typename S, int K, int M>
using Batch = rowfold::BatchQr<S, K, 400, M>;

#define ROWFOLD_SNAPSHOT_TYPES(S)                                                                            \
  Make<Batch, S, false>, Make<rowfold::GivensQr, S, false>, Make<rowfold::NormalEquations, S, false>,       \
      Make<rowfold::ForgettingRls, S, false>, Make<Batch, S, true>, Make<rowfold::GivensQr, S, true>,       \
      Make<rowfold::NormalEquations, S, true>, Make<rowfold::ForgettingRls, S, true>

template <typename Est>
void feed(Est& est, std::mt19937_64& rng, int n) {
  using Scalar = typename Est::Scalar;
  std::normal_distribution<double> g(0, 1);
  for (int i = 0; i < n; ++i) {
    Eigen::Matrix<Scalar, 3, 1> x(Scalar(g(rng)), Scalar(5 + g(rng)), Scalar(g(rng) * g(rng)));
    REQUIRE(est.add(x, Scalar(1 + x(0) - 2 * x(1) + 0.1 * g(rng))) == Status::ok);
  }
}

}  // namespace

TEST_CASE("CRC-32 check value (IEEE 802.3): crc32(\"123456789\") == 0xCBF43926") {
  const char* s = "123456789";
  CHECK(rowfold::detail::crc32(reinterpret_cast<const unsigned char*>(s), 9) == 0xCBF43926u);
}

TEST_CASE_TEMPLATE_DEFINE("snapshot and restore", F, snapshot_id) {
  std::mt19937_64 rng(99);
  auto a = F::make();
  feed(a, rng, 150);
  std::vector<unsigned char> image(a.snapshotSize());
  std::size_t written = 0;
  REQUIRE(a.snapshot(image.data(), image.size(), written) == Status::ok);
  REQUIRE(written == image.size());

  SUBCASE("a restored estimator continues bit-identically") {
    auto b = F::make();
    feed(b, rng, 3);  // some other state, to be overwritten
    REQUIRE(b.restore(image.data(), image.size()) == Status::ok);
    std::mt19937_64 r1(5), r2(5);
    feed(a, r1, 100);
    feed(b, r2, 100);
    const auto sa = a.solve();
    const auto sb = b.solve();
    // Exact equality (no tolerance): the continuation is bit-identical. (Compared by value, not
    // memcmp, because long double carries padding bytes with arbitrary content.)
    for (int j = 0; j < 3; ++j) CHECK(sa.coefficients(j) == sb.coefficients(j));
    CHECK(sa.intercept == sb.intercept);
    std::vector<unsigned char> ia(a.snapshotSize()), ib(b.snapshotSize());
    std::size_t wa = 0, wb = 0;
    REQUIRE(a.snapshot(ia.data(), ia.size(), wa) == Status::ok);
    REQUIRE(b.snapshot(ib.data(), ib.size(), wb) == Status::ok);
    CHECK(ia == ib);
  }

  SUBCASE("too small a buffer is refused") {
    std::size_t w = 7;
    CHECK(a.snapshot(image.data(), image.size() - 1, w) == Status::buffer_too_small);
    CHECK(w == 0);
  }

  SUBCASE("damaged, truncated or foreign images are refused and leave the state untouched") {
    auto b = F::make();
    feed(b, rng, 20);
    std::vector<unsigned char> before(b.snapshotSize());
    std::size_t w = 0;
    REQUIRE(b.snapshot(before.data(), before.size(), w) == Status::ok);
    const auto unchanged = [&]() {
      std::vector<unsigned char> now(b.snapshotSize());
      std::size_t w2 = 0;
      return b.snapshot(now.data(), now.size(), w2) == Status::ok && now == before;
    };
    // every single-bit flip anywhere in the image is caught (CRC-32 detects all 1-bit errors)
    for (std::size_t i = 0; i < image.size(); i += 7) {
      auto bad = image;
      bad[i] ^= 0x10;
      CHECK(b.restore(bad.data(), bad.size()) == Status::corrupt_image);
    }
    CHECK(b.restore(image.data(), image.size() - 1) == Status::corrupt_image);
    CHECK(b.restore(image.data(), 10) == Status::corrupt_image);
    CHECK(b.restore(nullptr, 0) == Status::corrupt_image);
    CHECK(unchanged());
    // a valid image from an estimator with other options
    auto other = F::make(0.5);
    feed(other, rng, 10);
    std::vector<unsigned char> foreign(other.snapshotSize());
    REQUIRE(other.snapshot(foreign.data(), foreign.size(), w) == Status::ok);
    CHECK(b.restore(foreign.data(), foreign.size()) == Status::image_mismatch);
    CHECK(unchanged());
  }
}

TEST_CASE_TEMPLATE_INVOKE(snapshot_id, ROWFOLD_WITH_FLOAT(ROWFOLD_SNAPSHOT_TYPES(float)) ROWFOLD_SNAPSHOT_TYPES(double)
                          ROWFOLD_WITH_LONG_DOUBLE(ROWFOLD_SNAPSHOT_TYPES(long double)));

TEST_CASE("an image of another estimator kind or Scalar is refused") {
  rowfold::GivensQr<double, 3> g;
  rowfold::NormalEquations<double, 3> n;
  rowfold::GivensQr<float, 3> f;
  rowfold::GivensQr<double, 4> k4;
  std::mt19937_64 rng(1);
  feed(g, rng, 10);
  std::vector<unsigned char> image(g.snapshotSize());
  std::size_t w = 0;
  REQUIRE(g.snapshot(image.data(), image.size(), w) == Status::ok);
  CHECK(n.restore(image.data(), image.size()) == Status::image_mismatch);
  CHECK(f.restore(image.data(), image.size()) == Status::image_mismatch);
  CHECK(k4.restore(image.data(), image.size()) == Status::image_mismatch);
  CHECK(n.count() == 0);
}
