// The two limits every result is compared with: one core's FMA peak (independent FMA chains
// held in registers, widest instruction set the CPU has, whatever the build flags) and one
// core's DRAM read bandwidth (a stream over a buffer much larger than the last-level cache).
#include <algorithm>
#include <ctime>
#include <cstdio>
#include <cstdlib>
#include <vector>

#include "common.hpp"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define ROWFOLD_BENCH_X86 1
#endif

namespace rowfold_bench {
namespace {

// Each kernel runs `n` rounds of CHAINS independent a = a*m + c updates and returns a value
// that depends on all of them; m < 1 keeps every chain bounded and normal. A macro rather than
// a template: the target attribute must sit on the function that holds the intrinsics.
#if ROWFOLD_BENCH_X86
#define ROWFOLD_CHAIN_KERNEL(NAME, TARGET, V, S, CHAINS, LANES, SET, FMA, STORE) \
  TARGET S NAME(long n) {                                                        \
    V acc[CHAINS];                                                               \
    for (int j = 0; j < CHAINS; ++j) acc[j] = SET(S(1) + S(j) / 64);             \
    const V m = SET(S(0.999)), c = SET(S(1e-3));                                 \
    for (long i = 0; i < n; ++i)                                                 \
      for (int j = 0; j < CHAINS; ++j) acc[j] = FMA(acc[j], m, c);               \
    alignas(64) S t[LANES];                                                      \
    S total = 0;                                                                 \
    for (int j = 0; j < CHAINS; ++j) {                                           \
      STORE(t, acc[j]);                                                          \
      for (int l = 0; l < LANES; ++l) total += t[l];                             \
    }                                                                            \
    return total;                                                                \
  }
#define ROWFOLD_AVX512 __attribute__((target("avx512f")))
#define ROWFOLD_AVX2 __attribute__((target("avx2,fma")))
// Baseline x86-64 (SSE2) has no fused instruction: multiply then add, 2 flops per lane.
#define ROWFOLD_SSE2_FMA_PD(a, b, c) _mm_add_pd(_mm_mul_pd(a, b), c)
#define ROWFOLD_SSE2_FMA_PS(a, b, c) _mm_add_ps(_mm_mul_ps(a, b), c)
ROWFOLD_CHAIN_KERNEL(fma512d, ROWFOLD_AVX512, __m512d, double, 16, 8, _mm512_set1_pd, _mm512_fmadd_pd, _mm512_store_pd)
ROWFOLD_CHAIN_KERNEL(fma512f, ROWFOLD_AVX512, __m512, float, 16, 16, _mm512_set1_ps, _mm512_fmadd_ps, _mm512_store_ps)
ROWFOLD_CHAIN_KERNEL(fma256d, ROWFOLD_AVX2, __m256d, double, 12, 4, _mm256_set1_pd, _mm256_fmadd_pd, _mm256_store_pd)
ROWFOLD_CHAIN_KERNEL(fma256f, ROWFOLD_AVX2, __m256, float, 12, 8, _mm256_set1_ps, _mm256_fmadd_ps, _mm256_store_ps)
ROWFOLD_CHAIN_KERNEL(sse2d, , __m128d, double, 12, 2, _mm_set1_pd, ROWFOLD_SSE2_FMA_PD, _mm_store_pd)
ROWFOLD_CHAIN_KERNEL(sse2f, , __m128, float, 12, 4, _mm_set1_ps, ROWFOLD_SSE2_FMA_PS, _mm_store_ps)
#endif

struct PeakKernel {
  const char* isa;
  double (*runD)(long);
  float (*runF)(long);
  double flopsPerIterD, flopsPerIterF;
};

PeakKernel peakKernel() {
#if ROWFOLD_BENCH_X86
  __builtin_cpu_init();
  if (__builtin_cpu_supports("avx512f")) return {"avx512f", fma512d, fma512f, 16 * 8 * 2, 16 * 16 * 2};
  if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))
    return {"avx2+fma", fma256d, fma256f, 12 * 4 * 2, 12 * 8 * 2};
  return {"sse2", sse2d, sse2f, 12 * 2 * 2, 12 * 4 * 2};
#else
  return {"none", nullptr, nullptr, 0, 0};
#endif
}

// Thread CPU time, as Google Benchmark's default timing: other processes on a shared machine
// then stretch the wall clock but not the measured limits.
double seconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return double(ts.tv_sec) + 1e-9 * double(ts.tv_nsec);
}

// The read buffer, kept for evictCaches(). Size: ROWFOLD_BENCH_DRAM_MIB (default 1024 MiB).
std::vector<double>& buffer() {
  static std::vector<double> b;
  if (b.empty()) {
    const char* env = std::getenv("ROWFOLD_BENCH_DRAM_MIB");
    const long mib = env != nullptr ? std::max(1L, std::atol(env)) : 1024L;
    b.assign(static_cast<std::size_t>(mib) * 1024 * 1024 / sizeof(double), 1.0);
  }
  return b;
}

// Sums the buffer with eight independent accumulators (never compute-bound).
double streamRead(const double* p, std::size_t n) {
  double s[8] = {0, 0, 0, 0, 0, 0, 0, 0};
  std::size_t i = 0;
  for (; i + 8 <= n; i += 8)
    for (int j = 0; j < 8; ++j) s[j] += p[i + j];
  for (; i < n; ++i) s[0] += p[i];
  return ((s[0] + s[1]) + (s[2] + s[3])) + ((s[4] + s[5]) + (s[6] + s[7]));
}

volatile double g_sink;

}  // namespace

Limits& limits() {
  static Limits l;
  return l;
}

void evictCaches() {
  const std::vector<double>& b = buffer();
  g_sink = streamRead(b.data(), std::min<std::size_t>(b.size(), 512u * 1024 * 1024 / sizeof(double)));
}

// Best of several short runs: the machine may be shared, the best run is the least disturbed.
void measureLimits() {
  Limits& l = limits();
  const PeakKernel k = peakKernel();
  l.isa = k.isa;
  if (k.runD != nullptr) {
    const long iters = 2000000;
    for (int rep = 0; rep < 7; ++rep) {
      double t = seconds();
      g_sink = k.runD(iters);
      l.peakDouble = std::max(l.peakDouble, k.flopsPerIterD * iters / (seconds() - t));
      t = seconds();
      g_sink = k.runF(iters);
      l.peakFloat = std::max(l.peakFloat, k.flopsPerIterF * iters / (seconds() - t));
    }
  }
  const std::vector<double>& b = buffer();
  for (int rep = 0; rep < 4; ++rep) {
    const double t = seconds();
    g_sink = streamRead(b.data(), b.size());
    l.readBandwidth = std::max(l.readBandwidth, double(b.size() * sizeof(double)) / (seconds() - t));
  }
}

namespace {

// The limits as benchmarks too, so that they appear (with repetitions) in every report.
template <typename S>
void BM_peak(benchmark::State& st) {
  const PeakKernel k = peakKernel();
  const long iters = 100000;
  for (auto _ : st) benchmark::DoNotOptimize(std::is_same<S, float>::value ? double(k.runF(iters)) : k.runD(iters));
  const double per = std::is_same<S, float>::value ? k.flopsPerIterF : k.flopsPerIterD;
  st.counters["flop/s"] = benchmark::Counter(per * iters * double(st.iterations()), benchmark::Counter::kIsRate);
  st.SetLabel(k.isa);
}

void BM_read(benchmark::State& st) {
  const std::vector<double>& b = buffer();
  for (auto _ : st) benchmark::DoNotOptimize(streamRead(b.data(), b.size()));
  st.SetBytesProcessed(static_cast<std::int64_t>(st.iterations()) * static_cast<std::int64_t>(b.size() * sizeof(double)));
}

const bool registered = [] {
  add("limits/fma_peak/double", BM_peak<double>)->Unit(benchmark::kMicrosecond);
  add("limits/fma_peak/float", BM_peak<float>)->Unit(benchmark::kMicrosecond);
  add("limits/dram_read", BM_read, 0.5)->Unit(benchmark::kMillisecond);
  return true;
}();

}  // namespace
}  // namespace rowfold_bench
