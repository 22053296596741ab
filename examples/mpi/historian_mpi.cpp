// rowfold MPI example: one least-squares fit of a large historian file, split across MPI ranks.
//
// INVENTED SCENARIO, SIMULATED DATA. The plant, its tag names, the numbers and the "true" model
// below are made up for this example; they describe no real plant and no real measurements.
// Rank 0 writes the file itself (a seeded std::mt19937_64) before the fit.
//
// Story: a soft sensor for an invented polymer reactor predicts the lab melt index from four
// online tags, one row per lab sample (every 10 minutes of invented plant time):
//   TI101 reactor temperature, TI102 jacket outlet temperature (follows the reactor temperature
//   closely: the two inputs are collinear), AI201 hydrogen ratio, FI301 catalyst feed.
// The catalyst's effect drifts slowly over the file (an invented ageing catalyst lot), so a fit
// with forgetting (lambda < 1) weighs the late rows and differs from the ordinary fit; the order
// in which the partial states are merged then matters. A few rows have an empty AI201 cell (an
// invented analyzer fault): every estimator refuses them with Status::nonfinite_input.
//
// What the program does (see README "Fitting across processes"):
//   1. rank 0 writes the CSV file; every rank then reads its own contiguous byte range of it
//      (range boundaries moved forward to the next line start, so each line is read by exactly
//      one rank);
//   2. each rank folds its rows into rowfold::GivensQr<double, 4> and NormalEquations<double, 4>,
//      each with lambda = 1 and with lambda < 1;
//   3. each rank writes every state with snapshot() into a fixed-size byte buffer, and MPI_Reduce
//      combines the buffers with a user-defined MPI_Op created with commute = 0, so MPI keeps the
//      rank order (rank 0's rows are the oldest): the op restores both images, calls merge and
//      snapshots the result back;
//   4. rank 0 also fits the whole file in one process and compares: the merged fit must equal the
//      single-process fit to a stated tolerance (coefficients, intercept, standard errors, R^2).
// The program exits non-zero when they differ beyond the tolerance or any Status is not ok, so
// ctest runs it with 2 ranks as a test. Timing lines are informational only.
//
// Usage: mpirun -np <ranks> rowfold_mpi_historian [--rows N] [--lambda L] [--file PATH]
//                                                 [--reuse] [--keep]
//   --rows N     rows to generate (default 200000; try 20000000 by hand)
//   --lambda L   forgetting factor of the second run, in (0, 1) (default 0.9999)
//   --file PATH  CSV file to write and read (default historian_invented.csv)
//   --reuse      fit an existing file instead of writing a new one
//   --keep       keep the file afterwards (it is deleted by default)

#include <mpi.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <fstream>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "rowfold/rowfold.hpp"

namespace {

constexpr int K = 4;
using Vec = Eigen::Matrix<double, K, 1>;
using Givens = rowfold::GivensQr<double, K>;
using Normal = rowfold::NormalEquations<double, K>;

constexpr const char* kHeader =
    "timestamp,TI101_reactor_temp_degC,TI102_jacket_out_degC,AI201_h2_ratio_mol_per_kmol,"
    "FI301_catalyst_kg_per_h,LAB_melt_index_g_per_10min";
constexpr const char* kInputShort[K] = {"TI101 reactor T", "TI102 jacket T", "AI201 H2 ratio", "FI301 catalyst"};

// Every image goes through a buffer of this fixed size; reduceToRoot checks that the estimator's
// snapshotSize() fits (for fixed K it never changes: 324 bytes for both estimators here, with
// room for state the library may add to the image later).
constexpr std::size_t kImageCapacity = 4096;
using ImageBuffer = std::array<unsigned char, kImageCapacity>;

// ---- command line ------------------------------------------------------------------------------

struct Settings {
  long long rows = 200000;
  double lambda = 0.9999;
  std::string file = "historian_invented.csv";
  bool reuse = false;
  bool keep = false;
};

bool parseArguments(int argc, char** argv, Settings& s, std::string& error) {
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    const bool hasValue = i + 1 < argc;
    if (a == "--rows" && hasValue) {
      char* end = nullptr;
      s.rows = std::strtoll(argv[++i], &end, 10);
      if (*end != '\0' || s.rows < 10) return error = "--rows needs an integer >= 10", false;
    } else if (a == "--lambda" && hasValue) {
      char* end = nullptr;
      s.lambda = std::strtod(argv[++i], &end);
      if (*end != '\0' || !(s.lambda > 0.0 && s.lambda < 1.0)) return error = "--lambda needs a value in (0, 1)", false;
    } else if (a == "--file" && hasValue) {
      s.file = argv[++i];
    } else if (a == "--reuse") {
      s.reuse = true;
    } else if (a == "--keep") {
      s.keep = true;
    } else {
      return error = "unknown or incomplete option '" + a + "'", false;
    }
  }
  return true;
}

// ---- the invented historian file ---------------------------------------------------------------

// "True" model of the invented plant: melt index = b0 + b'x + lab noise, where the catalyst
// slope drifts linearly from kCatalystStart to kCatalystEnd over the file.
constexpr double kTrueIntercept = -30.0;
constexpr double kTrueSlope[K - 1] = {0.35, 0.10, 0.90};  // reactor T, jacket T, H2 ratio
constexpr double kCatalystStart = 4.0, kCatalystEnd = 6.0;
constexpr double kLabNoise = 0.25;
constexpr long long kGapEvery = 9973;  // every 9973rd row the AI201 cell is empty (invented fault)
constexpr std::uint64_t kSeed = 20261202u;

bool generate(const Settings& s) {
  std::FILE* f = std::fopen(s.file.c_str(), "w");
  if (f == nullptr) {
    std::fprintf(stderr, "cannot write %s: %s\n", s.file.c_str(), std::strerror(errno));
    return false;
  }
  static char buffer[1 << 20];
  std::setvbuf(f, buffer, _IOFBF, sizeof buffer);
  std::fprintf(f, "%s\n", kHeader);
  std::mt19937_64 rng(kSeed);
  std::normal_distribution<double> n01(0.0, 1.0);
  // Slowly wandering tags: first-order autoregressive deviations around their set points.
  double dT = 0.0, dH = 0.0, dC = 0.0;
  const std::time_t start = 1735689600;  // 2025-01-01 00:00 UTC (invented plant time)
  for (long long t = 0; t < s.rows; ++t) {
    dT = 0.98 * dT + 0.4 * n01(rng);   // std ~ 2 degC
    dH = 0.95 * dH + 0.3 * n01(rng);   // std ~ 1 mol/kmol
    dC = 0.97 * dC + 0.03 * n01(rng);  // std ~ 0.12 kg/h
    const double reactorT = 85.0 + dT;
    const double jacketT = reactorT - 6.0 + 0.15 * n01(rng);  // collinear with reactorT
    const double h2 = 12.0 + dH;
    const double catalyst = 3.0 + dC;
    const double drift = static_cast<double>(t) / static_cast<double>(s.rows);
    const double catalystSlope = kCatalystStart + (kCatalystEnd - kCatalystStart) * drift;
    const double melt = kTrueIntercept + kTrueSlope[0] * reactorT + kTrueSlope[1] * jacketT + kTrueSlope[2] * h2 +
                        catalystSlope * catalyst + kLabNoise * n01(rng);
    const std::time_t when = start + static_cast<std::time_t>(t) * 600;
    std::tm utc{};
    gmtime_r(&when, &utc);
    char stamp[32];
    std::strftime(stamp, sizeof stamp, "%Y-%m-%dT%H:%M:%SZ", &utc);
    if ((t + 1) % kGapEvery == 0)
      std::fprintf(f, "%s,%.4f,%.4f,,%.5f,%.5f\n", stamp, reactorT, jacketT, catalyst, melt);
    else
      std::fprintf(f, "%s,%.4f,%.4f,%.4f,%.5f,%.5f\n", stamp, reactorT, jacketT, h2, catalyst, melt);
  }
  const bool ok = std::ferror(f) == 0;
  return std::fclose(f) == 0 && ok;
}

// ---- reading a slice ---------------------------------------------------------------------------

// One data line: timestamp, K tags, lab value. An empty cell becomes NaN (the estimators refuse
// the row); anything else that is not a number makes the line malformed.
bool parseLine(const std::string& line, Vec& x, double& y) {
  const char* p = std::strchr(line.c_str(), ',');
  if (p == nullptr) return false;
  for (int j = 0; j <= K; ++j) {
    ++p;  // past the comma
    const char* endOfField = p + std::strcspn(p, ",\r");
    double v = std::numeric_limits<double>::quiet_NaN();
    if (endOfField != p) {
      char* end = nullptr;
      v = std::strtod(p, &end);
      if (end != endOfField) return false;
    }
    if (j < K)
      x(j) = v;
    else
      y = v;
    p = endOfField;
    if (j < K && *p != ',') return false;
  }
  return *p == '\0' || (*p == '\r' && p[1] == '\0');
}

// The four estimators every rank folds its rows into.
struct Fits {
  Givens givensOls, givensForget;
  Normal normalOls, normalForget;
  explicit Fits(double lambda)
      : givensOls(givensOptions(1.0)),
        givensForget(givensOptions(lambda)),
        normalOls(normalOptions(1.0)),
        normalForget(normalOptions(lambda)) {}
  static Givens::Options givensOptions(double lambda) {
    Givens::Options o;
    o.forgetting = lambda;
    o.windup.enabled = false;  // exact exponential weights: guard-held steps depend on the state a row meets
    return o;
  }
  static Normal::Options normalOptions(double lambda) {
    Normal::Options o;
    o.forgetting = lambda;
    o.windup.enabled = false;  // exact exponential weights: guard-held steps depend on the state a row meets
    return o;
  }
};

// Extended-precision fits of the whole file (rank 0 only): the yardstick that shows the merged
// and the single-process fit are equally accurate, i.e. that their difference is rounding.
using GivensLong = rowfold::GivensQr<long double, K>;
struct Reference {
  GivensLong ols, forget;
  explicit Reference(double lambda) : ols(options(1.0)), forget(options(lambda)) {}
  static GivensLong::Options options(double lambda) {
    GivensLong::Options o;
    o.forgetting = lambda;
    o.windup.enabled = false;  // exact exponential weights: guard-held steps depend on the state a row meets
    return o;
  }
};

struct SliceResult {
  long long lines = 0;     // data lines read
  long long refused = 0;   // rows refused with nonfinite_input (empty cells)
  long long failures = 0;  // malformed lines, or any other Status than ok / nonfinite_input
  std::string firstProblem;
};

// Folds the data lines whose first byte lies in [begin, end) of the file (the header excluded).
// With `reference`, also folds the rows into the long double fits.
SliceResult foldSlice(const std::string& path, long long begin, long long end, Fits& fits,
                      Reference* reference = nullptr) {
  SliceResult r;
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    r.failures = 1;
    r.firstProblem = "cannot open " + path;
    return r;
  }
  long long pos = begin;
  std::string line;
  if (begin > 0) {
    // The line running through byte begin-1 belongs to the previous slice: skip to its end.
    in.seekg(begin - 1);
    std::getline(in, line);
    pos = begin - 1 + static_cast<long long>(line.size()) + 1;
  }
  Vec x;
  double y = 0.0;
  while (pos < end && std::getline(in, line)) {
    const long long lineStart = pos;
    pos += static_cast<long long>(line.size()) + 1;
    if (line.empty() || line == "\r") continue;
    if (lineStart == 0) {  // the header
      if (line.compare(0, std::strlen(kHeader), kHeader) != 0) {
        ++r.failures;
        r.firstProblem = "unexpected header: " + line;
      }
      continue;
    }
    ++r.lines;
    if (!parseLine(line, x, y)) {
      if (r.failures++ == 0) r.firstProblem = "malformed line at byte " + std::to_string(lineStart) + ": " + line;
      continue;
    }
    rowfold::Status s[6] = {fits.givensOls.add(x, y),    fits.givensForget.add(x, y), fits.normalOls.add(x, y),
                            fits.normalForget.add(x, y), rowfold::Status::ok,         rowfold::Status::ok};
    if (reference != nullptr) {
      const Eigen::Matrix<long double, K, 1> xl = x.cast<long double>();
      s[4] = reference->ols.add(xl, static_cast<long double>(y));
      s[5] = reference->forget.add(xl, static_cast<long double>(y));
    }
    bool refused = false;
    for (rowfold::Status st : s) {
      if (st == rowfold::Status::nonfinite_input) {
        refused = true;
      } else if (st != rowfold::Status::ok) {
        if (r.failures++ == 0) r.firstProblem = std::string("add returned ") + rowfold::nameOf(st);
      }
    }
    if (refused) ++r.refused;
  }
  return r;
}

long long fileSize(const std::string& path) {
  std::ifstream in(path, std::ios::binary | std::ios::ate);
  return in ? static_cast<long long>(in.tellg()) : -1;
}

// ---- the reduction operator --------------------------------------------------------------------

// User-defined MPI operation on estimator images of type Est. MPI calls it with `in` holding the
// combined state of lower ranks (older rows) and `inout` that of higher ranks (newer rows); with
// commute = 0 it keeps that order, so inout <- merge(in, inout) is "in's rows followed by
// inout's rows", as merge requires under forgetting. The op has no error channel: on any failure
// it zeroes the image, which every later restore refuses (corrupt_image), so rank 0 notices.
template <typename Est>
struct ImageReduction {
  // Set on every rank before MPI_Reduce (the op may run on any of them): the estimator options
  // (restore refuses an image written under other options) and the image size.
  static inline typename Est::Options options{};
  static inline int imageBytes = 0;

  static void combine(void* in, void* inout, int* len, MPI_Datatype*) {
    for (int i = 0; i < *len; ++i) {
      const auto* older = static_cast<const unsigned char*>(in) + static_cast<std::ptrdiff_t>(i) * imageBytes;
      auto* newer = static_cast<unsigned char*>(inout) + static_cast<std::ptrdiff_t>(i) * imageBytes;
      const auto bytes = static_cast<std::size_t>(imageBytes);
      Est first(options), second(options);  // fixed K: no allocation
      std::size_t written = 0;
      const bool ok = first.restore(older, bytes) == rowfold::Status::ok &&
                      second.restore(newer, bytes) == rowfold::Status::ok &&
                      first.merge(second) == rowfold::Status::ok &&
                      first.snapshot(newer, bytes, written) == rowfold::Status::ok && written == bytes;
      if (!ok) std::memset(newer, 0, bytes);
    }
  }
};

// Snapshots `local` on every rank, reduces the images to rank 0 in rank order and restores the
// result into `merged` (rank 0). Also gathers the per-rank images to rank 0 (`perRank`, one image
// of `imageBytes` bytes per rank) for the wrong-order demonstration. Returns the first non-ok
// Status seen on this rank.
template <typename Est>
rowfold::Status reduceToRoot(const Est& local, const typename Est::Options& options, Est& merged,
                             std::vector<unsigned char>& perRank, int rank, int ranks) {
  const std::size_t size = local.snapshotSize();
  if (size > kImageCapacity) return rowfold::Status::buffer_too_small;
  ImageReduction<Est>::options = options;
  ImageReduction<Est>::imageBytes = static_cast<int>(size);
  ImageBuffer mine{}, result{};
  std::size_t written = 0;
  const rowfold::Status s = local.snapshot(mine.data(), size, written);
  MPI_Datatype image;
  MPI_Type_contiguous(static_cast<int>(size), MPI_BYTE, &image);
  MPI_Type_commit(&image);
  MPI_Op op;
  MPI_Op_create(&ImageReduction<Est>::combine, /*commute=*/0, &op);
  MPI_Reduce(mine.data(), result.data(), 1, image, op, 0, MPI_COMM_WORLD);
  if (rank == 0) perRank.assign(static_cast<std::size_t>(ranks) * size, 0);
  MPI_Gather(mine.data(), 1, image, rank == 0 ? perRank.data() : nullptr, 1, image, 0, MPI_COMM_WORLD);
  MPI_Op_free(&op);
  MPI_Type_free(&image);
  if (s != rowfold::Status::ok) return s;
  if (rank == 0) return merged.restore(result.data(), size);
  return rowfold::Status::ok;
}

// ---- comparison --------------------------------------------------------------------------------

// The reported quantities of a fit, in double, from any estimator (also the long double reference).
struct Figures {
  rowfold::Status status = rowfold::Status::empty;
  std::uint64_t count = 0;
  double intercept = 0, interceptSe = 0, rSquared = 0, weight = 0, effectiveCount = 0, residualSe = 0;
  double coefficient[K] = {}, se[K] = {}, vif[K] = {};
  double scaledCondition = 0, lsCondition = 0;
  double offsetRatio = 0;  // max over x_j and y of |mean| / std: how far the data sit from zero
  rowfold::Flags flags;
};

template <typename Est>
Figures figuresOf(const Est& e) {
  Figures f;
  const auto s = e.summarize(0.95);
  f.status = s.status;
  if (s.status != rowfold::Status::ok) return f;
  f.count = s.count;
  f.intercept = static_cast<double>(s.intercept);
  f.interceptSe = static_cast<double>(s.interceptStandardError);
  f.rSquared = static_cast<double>(s.rSquared);
  f.weight = static_cast<double>(e.weightSum());
  f.effectiveCount = static_cast<double>(s.effectiveCount);
  f.residualSe = static_cast<double>(s.residualStandardError);
  f.scaledCondition = static_cast<double>(s.conditioning.scaledCondition);
  f.lsCondition = static_cast<double>(s.conditioning.lsCondition);
  f.flags = s.flags;
  typename Est::Matrix cov;
  if (e.covariance(cov) == rowfold::Status::ok) {
    for (int j = 0; j < K; ++j)
      if (cov(j, j) > 0)
        f.offsetRatio = std::max(f.offsetRatio, std::abs(static_cast<double>(e.centering().xMean()(j))) /
                                                    std::sqrt(static_cast<double>(cov(j, j))));
    if (s.sst > 0)
      f.offsetRatio = std::max(f.offsetRatio, std::abs(static_cast<double>(e.centering().yMean())) /
                                                  std::sqrt(static_cast<double>(s.sst / e.weightSum())));
  }
  for (int j = 0; j < K; ++j) {
    f.coefficient[j] = static_cast<double>(s.coefficients(j));
    f.se[j] = static_cast<double>(s.standardErrors(j));
    f.vif[j] = static_cast<double>(s.conditioning.vif(j));
  }
  return f;
}

// |a - b| relative to |b|, or to `floor` when |b| is smaller. Coefficients use their standard
// error as the floor: a coefficient within one standard error of zero (TI102 in some runs) has
// no relative scale of its own, and its rounding error follows the size of the other ones.
double relativeDifference(double a, double b, double floor = 0.0) {
  const double d = std::abs(a - b);
  const double scale = std::max(std::abs(b), floor);
  return scale > 0.0 ? d / scale : d;
}

double termDifference(const Figures& a, const Figures& b, int j) {  // j = -1: the intercept
  if (j < 0)
    return std::max(relativeDifference(a.intercept, b.intercept, b.interceptSe),
                    relativeDifference(a.interceptSe, b.interceptSe));
  return std::max(relativeDifference(a.coefficient[j], b.coefficient[j], b.se[j]),
                  relativeDifference(a.se[j], b.se[j]));
}

// Largest relative difference of coefficients, intercept, standard errors, R^2 and the forgotten
// weight sum W; infinite when the counts differ or a summary failed.
double maxDifference(const Figures& a, const Figures& b) {
  if (a.status != rowfold::Status::ok || b.status != rowfold::Status::ok || a.count != b.count)
    return std::numeric_limits<double>::infinity();
  double d = std::max(
      {termDifference(a, b, -1), relativeDifference(a.rSquared, b.rSquared), relativeDifference(a.weight, b.weight)});
  for (int j = 0; j < K; ++j) d = std::max(d, termDifference(a, b, j));
  return d;
}

// Tolerance for "merged equals single-process fit", from the rounding-order argument. Both sides
// are the same computation on the same rows; only the order of rounding differs (sequential
// Givens sweeps or rank-one updates vs. partial states stacked and re-triangularized, pooled
// means by the pairwise formula, lambda^n by binary powering instead of n products). The leading
// difference is the online centering: each row is centered on a running mean whose rounding
// errors, of size u |mean| per update, add up like a random walk to about u |mean| sqrt(n). That
// perturbs the centered data by a relative u sqrt(n) |mean| / std, which the least-squares
// condition number kappa_LS = kappa_s + kappa_s^2 tan(theta) (Wedin 1973; `lsCondition`)
// carries into the coefficients. NormalEquations adds its own u kappa_s^2 from forming the
// co-moments. So each side is off by about
//     e = u sqrt(n_eff) (kappa_LS * max(1, |mean|/std) [+ kappa_s^2 for NormalEquations])
// and the two sides are compared with tolerance 10 e (u = 1.1e-16; measured differences are
// 0.3-0.6 e). Both sides sit equally far from a long double fit of the file (printed), so the
// difference is rounding. A real slip shows far above 10 e: dropping one row moves a coefficient
// by 6e-5 (lambda = 1) and 4e-6 (lambda = 0.9999) here, a wrong merge order by 2e-1 (and the
// row counts are compared exactly).
double roundingScale(const Figures& f, bool normalEquations) {
  const double u = std::numeric_limits<double>::epsilon() / 2;
  const double spread =
      f.lsCondition * std::max(1.0, f.offsetRatio) + (normalEquations ? f.scaledCondition * f.scaledCondition : 0.0);
  return u * std::sqrt(std::max(1.0, f.effectiveCount)) * spread;
}
constexpr double kToleranceFactor = 10.0;

// Prints the merged fit next to the single-process fit (and, when given, their distances from
// the long double reference); returns true when merged and single agree within the tolerance.
bool report(const char* title, const Figures& m, const Figures& s, const Figures* reference, bool normalEquations,
            double& measured) {
  std::printf("\n%s\n", title);
  if (m.status != rowfold::Status::ok || s.status != rowfold::Status::ok) {
    std::printf("  summary status: merged %s, single %s: FAILED\n", rowfold::nameOf(m.status),
                rowfold::nameOf(s.status));
    measured = std::numeric_limits<double>::infinity();
    return false;
  }
  std::printf("  rows %llu, effective rows %.1f, R^2 %.6f, residual std. error %.5f\n",
              static_cast<unsigned long long>(m.count), m.effectiveCount, m.rSquared, m.residualSe);
  std::printf("  %-16s %13s %11s %9s   %s\n", "term", "coefficient", "std. error", "VIF", "rel. diff merged vs single");
  std::printf("  %-16s %13.6f %11.6f %9s   %.1e\n", "intercept", m.intercept, m.interceptSe, "",
              termDifference(m, s, -1));
  for (int j = 0; j < K; ++j)
    std::printf("  %-16s %13.6f %11.6f %9.1f   %.1e\n", kInputShort[j], m.coefficient[j], m.se[j], m.vif[j],
                termDifference(m, s, j));
  std::printf("  flags:");
  bool any = false;
  for (rowfold::Flag f : rowfold::kAllFlags)
    if (m.flags.has(f)) {
      std::printf(" %s", rowfold::nameOf(f));
      any = true;
    }
  std::printf("%s\n", any ? "" : " none");
  const double scale = roundingScale(s, normalEquations);
  const double tolerance = kToleranceFactor * scale;
  std::printf("  kappa_s %.1f, kappa_LS %.1f, max |mean|/std %.1f: rounding scale e = %.1e, tolerance 10 e = %.1e\n",
              s.scaledCondition, s.lsCondition, s.offsetRatio, scale, tolerance);
  if (reference != nullptr)
    std::printf("  distance from a long double fit of the whole file: merged %.1e, single %.1e\n",
                maxDifference(m, *reference), maxDifference(s, *reference));
  measured = maxDifference(m, s);
  const bool pass = measured <= tolerance;
  std::printf("  merged vs single-process fit: max relative difference %.2e = %.2f e: %s\n", measured, measured / scale,
              pass ? "ok" : "FAILED");
  return pass;
}

// Merges the per-rank images on rank 0 in the given order (true: rank order, false: reversed).
template <typename Est>
rowfold::Status mergeLocally(const std::vector<unsigned char>& images, int ranks, const typename Est::Options& o,
                             bool rankOrder, Est& out) {
  const std::size_t size = images.size() / static_cast<std::size_t>(ranks);
  out.reset();
  for (int i = 0; i < ranks; ++i) {
    const int r = rankOrder ? i : ranks - 1 - i;
    Est part(o);
    const rowfold::Status s = part.restore(images.data() + static_cast<std::size_t>(r) * size, size);
    if (s != rowfold::Status::ok) return s;
    const rowfold::Status m = out.merge(part);
    if (m != rowfold::Status::ok) return m;
  }
  return rowfold::Status::ok;
}

}  // namespace

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  int rank = 0, ranks = 1;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  MPI_Comm_size(MPI_COMM_WORLD, &ranks);
  Settings settings;
  std::string error;
  if (!parseArguments(argc, argv, settings, error)) {
    if (rank == 0) std::fprintf(stderr, "rowfold_mpi_historian: %s\n", error.c_str());
    MPI_Finalize();
    return 2;
  }

  // 1. Rank 0 writes the invented file; every rank then finds its byte range.
  int ok = 1;
  if (rank == 0) {
    std::printf(
        "rowfold MPI example: INVENTED DATA. A made-up polymer reactor's lab melt index is\n"
        "predicted from four made-up plant tags; no real plant or measurement is involved.\n");
    std::printf("ranks: %d, file: %s, lambda = 1 and lambda = %.6g\n", ranks, settings.file.c_str(), settings.lambda);
    if (!settings.reuse) {
      const double t0 = MPI_Wtime();
      ok = generate(settings) ? 1 : 0;
      if (ok != 0)
        std::printf("wrote %lld invented rows (%.1f MB) in %.2f s\n", settings.rows,
                    static_cast<double>(fileSize(settings.file)) / 1e6, MPI_Wtime() - t0);
    }
    std::fflush(stdout);
  }
  MPI_Bcast(&ok, 1, MPI_INT, 0, MPI_COMM_WORLD);
  if (ok == 0) {
    MPI_Finalize();
    return 1;
  }
  const long long bytes = fileSize(settings.file);
  const long long begin = bytes * rank / ranks, end = bytes * (rank + 1) / ranks;

  // 2. Each rank folds its own slice.
  const double tFold = MPI_Wtime();
  Fits local(settings.lambda);
  const SliceResult slice =
      bytes > 0 ? foldSlice(settings.file, begin, end, local) : SliceResult{0, 0, 1, "cannot read " + settings.file};
  const double foldSeconds = MPI_Wtime() - tFold;
  if (slice.failures != 0)
    std::fprintf(stderr, "rank %d: %lld problem(s), first: %s\n", rank, slice.failures, slice.firstProblem.c_str());
  long long mine[4] = {begin, slice.lines, slice.refused, slice.failures};
  std::vector<long long> perRankCounts(static_cast<std::size_t>(4 * ranks));
  MPI_Gather(mine, 4, MPI_LONG_LONG, perRankCounts.data(), 4, MPI_LONG_LONG, 0, MPI_COMM_WORLD);

  // 3. Snapshot, reduce with the non-commutative merge op, restore on rank 0.
  const double tReduce = MPI_Wtime();
  Fits merged(settings.lambda);
  std::vector<unsigned char> imagesOls, imagesForget, unused;
  const rowfold::Status reduced[4] = {
      reduceToRoot(local.givensOls, Fits::givensOptions(1.0), merged.givensOls, imagesOls, rank, ranks),
      reduceToRoot(local.givensForget, Fits::givensOptions(settings.lambda), merged.givensForget, imagesForget, rank,
                   ranks),
      reduceToRoot(local.normalOls, Fits::normalOptions(1.0), merged.normalOls, unused, rank, ranks),
      reduceToRoot(local.normalForget, Fits::normalOptions(settings.lambda), merged.normalForget, unused, rank, ranks)};
  const double reduceSeconds = MPI_Wtime() - tReduce;
  int localBad = slice.failures != 0 ? 1 : 0;
  for (rowfold::Status s : reduced)
    if (s != rowfold::Status::ok) {
      std::fprintf(stderr, "rank %d: snapshot/reduce/restore returned %s\n", rank, rowfold::nameOf(s));
      localBad = 1;
    }
  int anyBad = 0;
  MPI_Reduce(&localBad, &anyBad, 1, MPI_INT, MPI_MAX, 0, MPI_COMM_WORLD);

  int exitCode = 0;
  if (rank == 0) {
    std::printf("\nper-rank slices (byte offset, data lines, refused rows with an empty cell):\n");
    for (int r = 0; r < ranks; ++r)
      std::printf("  rank %d: from byte %lld, %lld lines, %lld refused\n", r, perRankCounts[4 * r],
                  perRankCounts[4 * r + 1], perRankCounts[4 * r + 2]);
    std::printf("fold %.2f s on rank 0, snapshot + reduce + restore of 4 states %.4f s (informational)\n", foldSeconds,
                reduceSeconds);

    // 4. The same file in one process, for the comparison.
    const double tSingle = MPI_Wtime();
    Fits single(settings.lambda);
    Reference reference(settings.lambda);
    const SliceResult whole = foldSlice(settings.file, 0, bytes, single, &reference);
    std::printf(
        "single-process fit of the whole file on rank 0 (plus a long double reference): %lld lines, "
        "%lld refused, %.2f s (informational)\n",
        whole.lines, whole.refused, MPI_Wtime() - tSingle);
    long long linesSum = 0, refusedSum = 0;
    for (int r = 0; r < ranks; ++r) {
      linesSum += perRankCounts[4 * r + 1];
      refusedSum += perRankCounts[4 * r + 2];
    }
    bool pass = anyBad == 0 && whole.failures == 0 && linesSum == whole.lines && refusedSum == whole.refused;
    if (!pass) std::printf("FAILED: a rank reported a problem, or the slices do not cover the file exactly once\n");

    // Merged vs single: every coefficient, standard error, R^2 and W, relative, within 10 e where
    // e is the rounding scale of roundingScale() (derived there).
    const Figures referenceOls = figuresOf(reference.ols), referenceForget = figuresOf(reference.forget);
    double dGivensOls = 0, dGivensForget = 0, dNormalOls = 0, dNormalForget = 0;
    char title[160];
    pass &= report("GivensQr<double, 4>, lambda = 1 (ordinary least squares), merged from the ranks",
                   figuresOf(merged.givensOls), figuresOf(single.givensOls), &referenceOls, false, dGivensOls);
    std::snprintf(title, sizeof title, "GivensQr<double, 4>, lambda = %.6g (memory %.0f rows), merged from the ranks",
                  settings.lambda, 1.0 / (1.0 - settings.lambda));
    pass &= report(title, figuresOf(merged.givensForget), figuresOf(single.givensForget), &referenceForget, false,
                   dGivensForget);
    pass &= report("NormalEquations<double, 4> (added co-moments), lambda = 1, merged from the ranks",
                   figuresOf(merged.normalOls), figuresOf(single.normalOls), &referenceOls, true, dNormalOls);
    std::snprintf(title, sizeof title, "NormalEquations<double, 4> (added co-moments), lambda = %.6g, merged",
                  settings.lambda);
    pass &= report(title, figuresOf(merged.normalForget), figuresOf(single.normalForget), &referenceForget, true,
                   dNormalForget);

    // 5. Why commute = 0: merging the same images in reversed rank order.
    if (ranks > 1) {
      Givens ols(Fits::givensOptions(1.0)), forget(Fits::givensOptions(settings.lambda));
      const rowfold::Status a = mergeLocally(imagesOls, ranks, Fits::givensOptions(1.0), false, ols);
      const rowfold::Status b = mergeLocally(imagesForget, ranks, Fits::givensOptions(settings.lambda), false, forget);
      if (a == rowfold::Status::ok && b == rowfold::Status::ok) {
        std::printf("\nthe same partial states merged in reversed rank order (what a commutative op may do):\n");
        std::printf("  lambda = 1: max relative difference %.1e from the single fit (the merge is symmetric)\n",
                    maxDifference(figuresOf(ols), figuresOf(single.givensOls)));
        std::printf(
            "  lambda = %.6g: max relative difference %.1e (newest rows aged as if oldest): the op\n"
            "  must keep the rank order, hence MPI_Op_create(..., commute = 0, ...)\n",
            settings.lambda, maxDifference(figuresOf(forget), figuresOf(single.givensForget)));
      } else {
        std::printf("reversed-order merge failed: %s / %s\n", rowfold::nameOf(a), rowfold::nameOf(b));
        pass = false;
      }
    }
    std::printf("\nresult: %s (GivensQr %.1e / %.1e, NormalEquations %.1e / %.1e for lambda = 1 / %.6g)\n",
                pass ? "merged fits equal the single-process fits" : "FAILED", dGivensOls, dGivensForget, dNormalOls,
                dNormalForget, settings.lambda);
    exitCode = pass ? 0 : 1;
    if (!settings.keep && !settings.reuse) std::remove(settings.file.c_str());
    std::fflush(stdout);
  }
  MPI_Bcast(&exitCode, 1, MPI_INT, 0, MPI_COMM_WORLD);
  MPI_Finalize();
  return exitCode;
}
