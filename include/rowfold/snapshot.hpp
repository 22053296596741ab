/// @file
/// Byte images of estimator states (for flash, mailboxes, checkpoints): versioned header,
/// payload, CRC-32. Used through EstimatorBase::snapshot / restore.
///
/// Layout (every field in the *native* byte order of the machine that wrote it; the header
/// carries the tag 0x01020304 so an image from a machine of the other byte order is refused,
/// not misread):
/// ```
///   offset size  field
///    0      4    magic "RFLD"
///    4      2    format version (kSnapshotVersion)
///    6      1    sizeof(Scalar)
///    7      1    mantissa digits of Scalar (24 float, 53 double, 64/113 long double)
///    8      1    estimator kind (EstimatorKind)
///    9      1    intercept mode (0 fit, 1 none)
///   10      2    reserved (0)
///   12      4    byte-order tag 0x01020304
///   16      4    K
///   20      4    payload length in bytes
///   24      8    forgetting factor (IEEE double)
///   32      8    VIF limit (IEEE double)
///   40      P    payload: options (guard, then the estimator's), centering state, guard state,
///                then the estimator's own state
///   40+P    4    CRC-32 (IEEE 802.3, reflected polynomial 0xEDB88320) of bytes [0, 40+P)
/// ```
/// Scalars are stored as their raw bytes, so a restored estimator continues bit-identically.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>

namespace rowfold {

/// Which estimator wrote an image (byte 8 of the header): BatchQr = 1, GivensQr = 2,
/// NormalEquations = 3, ForgettingRls = 4. `restore` refuses an image of another kind with
/// `Status::image_mismatch`.
enum class EstimatorKind : std::uint8_t { batch_qr = 1, givens_qr = 2, normal_equations = 3, forgetting_rls = 4 };

/// Format version written at offset 4 of every image; `restore` accepts only this version
/// (`Status::image_mismatch` otherwise).
/// 2: guard options and state in the payload; 3: GivensQr keeps the square-root-free factor
/// (d, Rbar and a power-of-4 scale) instead of [R z; 0 rho].
constexpr std::uint16_t kSnapshotVersion = 3;

namespace detail {

constexpr std::size_t kSnapshotHeaderSize = 40;
constexpr std::uint32_t kByteOrderTag = 0x01020304u;

/// CRC-32 as in IEEE 802.3 / zlib (check value: "123456789" -> 0xCBF43926). Bitwise, no table,
/// so it costs no flash; images are small.
inline std::uint32_t crc32(const unsigned char* data, std::size_t n, std::uint32_t crc = 0) {
  crc = ~crc;
  for (std::size_t i = 0; i < n; ++i) {
    crc ^= data[i];
    for (int b = 0; b < 8; ++b) crc = (crc >> 1) ^ (0xEDB88320u & (0u - (crc & 1u)));
  }
  return ~crc;
}

/// Visitor that counts payload bytes.
struct ImageCounter {
  std::size_t bytes = 0;
  template <typename T>
  void field(const T&) { bytes += sizeof(T); }
  template <typename T>
  void array(const T*, std::size_t n) { bytes += n * sizeof(T); }
};

/// Visitor that writes payload bytes (caller guarantees room).
struct ImageWriter {
  unsigned char* out;
  template <typename T>
  void field(const T& v) {
    std::memcpy(out, &v, sizeof(T));
    if constexpr (std::is_same<T, long double>::value && std::numeric_limits<long double>::digits == 64) {
      // x87 extended precision: 10 significant bytes, the rest is padding with arbitrary
      // content; zero it so equal states give equal images.
      std::memset(out + 10, 0, sizeof(T) - 10);
    }
    out += sizeof(T);
  }
  template <typename T>
  void array(const T* v, std::size_t n) {
    if constexpr (std::is_same<T, long double>::value) {
      for (std::size_t i = 0; i < n; ++i) field(v[i]);
    } else {
      if (n == 0) return;
      std::memcpy(out, v, n * sizeof(T));
      out += n * sizeof(T);
    }
  }
};

/// Visitor that reads payload bytes (caller validated the length first).
struct ImageReader {
  const unsigned char* in;
  template <typename T>
  void field(T& v) {
    std::memcpy(&v, in, sizeof(T));
    in += sizeof(T);
  }
  template <typename T>
  void array(T* v, std::size_t n) {
    if (n == 0) return;
    std::memcpy(v, in, n * sizeof(T));
    in += n * sizeof(T);
  }
};

template <typename T>
inline void putField(unsigned char* at, const T& v) {
  std::memcpy(at, &v, sizeof(T));
}
template <typename T>
inline T getField(const unsigned char* at) {
  T v;
  std::memcpy(&v, at, sizeof(T));
  return v;
}

}  // namespace detail
}  // namespace rowfold
