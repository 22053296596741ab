/// @file
/// Test support: loads the NIST StRD linear least-squares datasets and scores results by LRE.
///
/// The datasets (tests/data/nist/*.dat) are the NIST ITL Statistical Reference Datasets for
/// linear least squares; tests/data/nist/SOURCE.md gives their origin and md5sums. This header is
/// for the test suites only; it is not part of the rowfold library and may use the heap, iostreams
/// and exceptions freely.
///
/// File layout relied on (as documented in SOURCE.md): the header declares
/// `Certified Values (lines A to B)` and `Data (lines C to D)`, 1-based and inclusive; lines end
/// in CR/LF; the certified block has one `B<k> estimate sd` line per parameter, then
/// `Residual` / `Standard Deviation <value>` and `R-Squared <value>`; data rows hold y first,
/// then the x column(s).
///
/// Errors (missing file, malformed file) throw std::runtime_error; in a build without exceptions
/// they print a message to stderr and abort.
#pragma once

#include <cmath>
#include <cstddef>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <type_traits>
#include <vector>
#if defined(__cpp_exceptions) || defined(__EXCEPTIONS) || defined(_CPPUNWIND)
#include <stdexcept>
#define ROWFOLD_TEST_NIST_HAS_EXCEPTIONS 1
#else
#define ROWFOLD_TEST_NIST_HAS_EXCEPTIONS 0
#endif

#ifndef ROWFOLD_NIST_DIR
#define ROWFOLD_NIST_DIR "tests/data/nist"
#endif

namespace rowfold_test {

/// One NIST StRD linear dataset as printed in its .dat file.
///
/// Model: if `predictors == 1` the model is the polynomial
/// y = [B0 +] B1 x + ... + B_degree x^degree; otherwise (Longley) it is
/// y = B0 + B1 x1 + ... + B_predictors x_predictors and `degree` is 0.
struct NistDataset {
    std::string name;
    int degree = 0;          ///< polynomial degree for single-x datasets, 0 for Longley
    bool intercept = false;  ///< true when the model has B0
    int predictors = 0;      ///< number of x columns in the file
    std::vector<long double> y;               ///< y[row], parsed with strtold
    std::vector<std::vector<long double>> x;  ///< x[row][col], raw as parsed with strtold
    std::vector<std::string> yText;               ///< y tokens exactly as printed
    std::vector<std::vector<std::string>> xText;  ///< x tokens exactly as printed
    /// Certified estimates and their standard deviations: B0 first when `intercept`, then B1..Bk.
    std::vector<long double> coef, coefSd;
    long double residualSd = 0;  ///< certified residual standard deviation
    long double rSquared = 0;    ///< certified R² (uncentred for the no-intercept sets, as NIST prints it)
    std::vector<std::string> coefText, coefSdText;  ///< certified tokens exactly as printed

    std::size_t observations() const { return y.size(); }
};

namespace detail {

[[noreturn]] inline void nistFail(const std::string& msg) {
#if ROWFOLD_TEST_NIST_HAS_EXCEPTIONS
    throw std::runtime_error("rowfold_test::loadNist: " + msg);
#else
    std::fprintf(stderr, "rowfold_test::loadNist: %s\n", msg.c_str());
    std::abort();
#endif
}

inline std::vector<std::string> nistTokens(const std::string& line) {
    std::vector<std::string> out;
    std::istringstream in(line);
    std::string tok;
    while (in >> tok) out.push_back(tok);
    return out;
}

inline std::string nistTrimLeft(const std::string& s) {
    std::size_t i = 0;
    while (i < s.size() && (s[i] == ' ' || s[i] == '\t')) ++i;
    return s.substr(i);
}

inline bool nistStartsWith(const std::string& s, const char* prefix) {
    return s.compare(0, std::char_traits<char>::length(prefix), prefix) == 0;
}

/// Parses the whole token as a number (strtold); fails on trailing garbage.
inline long double nistNumber(const std::string& tok, const std::string& where) {
    if (tok.empty()) nistFail("empty number in " + where);
    const char* begin = tok.c_str();
    char* end = nullptr;
    const long double v = std::strtold(begin, &end);
    if (end != begin + tok.size()) nistFail("bad number '" + tok + "' in " + where);
    return v;
}

/// Reads "(lines A to B)" from a header line.
inline void nistLineRange(const std::string& line, std::size_t& first, std::size_t& last,
                          const std::string& where) {
    const std::size_t p = line.find("(lines");
    if (p == std::string::npos) nistFail("no line range in " + where);
    long a = 0, b = 0;
    if (std::sscanf(line.c_str() + p, "(lines %ld to %ld)", &a, &b) != 2 || a < 1 || b < a)
        nistFail("bad line range in " + where + ": " + line);
    first = static_cast<std::size_t>(a);
    last = static_cast<std::size_t>(b);
}

}  // namespace detail

/// Loads `<ROWFOLD_NIST_DIR>/<name>.dat` (e.g. name = "Longley").
inline NistDataset loadNist(const std::string& name) {
    using namespace detail;
    const std::string path = std::string(ROWFOLD_NIST_DIR) + "/" + name + ".dat";
    std::ifstream file(path, std::ios::binary);
    if (!file) nistFail("cannot open " + path);

    std::vector<std::string> lines;  // lines[i] is file line i + 1, trailing \r removed
    for (std::string line; std::getline(file, line);) {
        if (!line.empty() && line.back() == '\r') line.pop_back();
        lines.push_back(line);
    }

    // Header: the two line ranges and the declared number of observations.
    std::size_t certFirst = 0, certLast = 0, dataFirst = 0, dataLast = 0;
    long declaredObs = -1;
    for (const std::string& line : lines) {
        const std::string t = nistTrimLeft(line);
        if (certFirst == 0 && t.find("Certified Values") != std::string::npos &&
            t.find("(lines") != std::string::npos)
            nistLineRange(t, certFirst, certLast, path);
        else if (dataFirst == 0 && nistStartsWith(t, "Data") &&
                 t.find("(lines") != std::string::npos)
            nistLineRange(t, dataFirst, dataLast, path);
        const std::vector<std::string> tok = nistTokens(t);
        if (declaredObs < 0 && tok.size() == 2 && tok[1] == "Observations")
            declaredObs = std::strtol(tok[0].c_str(), nullptr, 10);
        if (certFirst != 0 && dataFirst != 0 && declaredObs >= 0) break;
    }
    if (certFirst == 0) nistFail("no 'Certified Values (lines A to B)' header in " + path);
    if (dataFirst == 0) nistFail("no 'Data (lines C to D)' header in " + path);
    if (certLast > lines.size() || dataLast > lines.size())
        nistFail("line range past end of " + path);

    NistDataset ds;
    ds.name = name;

    // Certified block.
    bool haveResidualSd = false, haveR2 = false, afterResidual = false;
    int expectIndex = -1;  // next B index expected
    for (std::size_t ln = certFirst; ln <= certLast; ++ln) {
        const std::string& line = lines[ln - 1];
        const std::string where = path + ":" + std::to_string(ln);
        const std::string t = nistTrimLeft(line);
        const std::vector<std::string> tok = nistTokens(t);
        if (tok.empty()) continue;
        const bool startsWithSpace = !line.empty() && (line[0] == ' ' || line[0] == '\t');
        if (startsWithSpace && t.size() >= 2 && t[0] == 'B' && t[1] >= '0' && t[1] <= '9') {
            if (tok.size() != 3) nistFail("expected 'Bk estimate sd' at " + where);
            const int k = static_cast<int>(std::strtol(tok[0].c_str() + 1, nullptr, 10));
            if (expectIndex < 0) {
                if (k != 0 && k != 1) nistFail("first parameter is not B0 or B1 at " + where);
                ds.intercept = (k == 0);
            } else if (k != expectIndex) {
                nistFail("parameters out of order at " + where);
            }
            expectIndex = k + 1;
            ds.coefText.push_back(tok[1]);
            ds.coefSdText.push_back(tok[2]);
            ds.coef.push_back(nistNumber(tok[1], where));
            ds.coefSd.push_back(nistNumber(tok[2], where));
        } else if (tok.size() == 1 && tok[0] == "Residual") {
            afterResidual = true;
        } else if (afterResidual && !haveResidualSd && nistStartsWith(t, "Standard Deviation") &&
                   tok.size() == 3) {
            ds.residualSd = nistNumber(tok[2], where);
            haveResidualSd = true;
        } else if (tok[0] == "R-Squared" && tok.size() == 2) {
            ds.rSquared = nistNumber(tok[1], where);
            haveR2 = true;
        }
    }
    if (ds.coef.empty()) nistFail("no certified parameters in " + path);
    if (!haveResidualSd) nistFail("no certified residual standard deviation in " + path);
    if (!haveR2) nistFail("no certified R-Squared in " + path);

    // Data block: y first, then the x columns.
    for (std::size_t ln = dataFirst; ln <= dataLast; ++ln) {
        const std::string where = path + ":" + std::to_string(ln);
        const std::vector<std::string> tok = nistTokens(lines[ln - 1]);
        if (tok.size() < 2) nistFail("data row with fewer than 2 columns at " + where);
        if (ds.predictors == 0) ds.predictors = static_cast<int>(tok.size()) - 1;
        if (static_cast<int>(tok.size()) != ds.predictors + 1)
            nistFail("ragged data row at " + where);
        ds.yText.push_back(tok[0]);
        ds.y.push_back(nistNumber(tok[0], where));
        ds.xText.emplace_back(tok.begin() + 1, tok.end());
        std::vector<long double> row;
        for (std::size_t c = 1; c < tok.size(); ++c) row.push_back(nistNumber(tok[c], where));
        ds.x.push_back(row);
    }
    if (declaredObs >= 0 && static_cast<std::size_t>(declaredObs) != ds.y.size())
        nistFail("header declares " + std::to_string(declaredObs) + " observations but " + path +
                 " has " + std::to_string(ds.y.size()));

    // Model shape from the certified parameters (the Longley header's "B0,...,B7" is NIST's slip;
    // the count of B lines is what counts).
    const int slopes = static_cast<int>(ds.coef.size()) - (ds.intercept ? 1 : 0);
    if (ds.predictors == 1) {
        ds.degree = slopes;
    } else {
        ds.degree = 0;
        if (slopes != ds.predictors)
            nistFail("parameter count does not match the x columns in " + path);
    }
    if (slopes < 1) nistFail("no slope parameters in " + path);
    return ds;
}

/// Number of regressor columns designRow() fills (the intercept column is not included).
inline std::size_t numRegressors(const NistDataset& ds) {
    return static_cast<std::size_t>(ds.predictors == 1 ? ds.degree : ds.predictors);
}

/// Parses a decimal token straight into Scalar: strtof / strtod / strtold for the built-in
/// floating types, so each value is correctly rounded from the printed text; any other Scalar is
/// built from the long double value.
template <typename Scalar>
Scalar parseNistScalar(const std::string& text) {
    if constexpr (std::is_same_v<Scalar, float>) {
        return std::strtof(text.c_str(), nullptr);
    } else if constexpr (std::is_same_v<Scalar, double>) {
        return std::strtod(text.c_str(), nullptr);
    } else if constexpr (std::is_same_v<Scalar, long double>) {
        return std::strtold(text.c_str(), nullptr);
    } else {
        return Scalar(std::strtold(text.c_str(), nullptr));
    }
}

/// Fills row `row` of the design (without the intercept column) and its response, in Scalar.
///
/// Polynomial sets: xOut = x, x², …, x^degree, formed by repeated multiplication in Scalar from
/// the x parsed from its text in Scalar. Longley: the six columns parsed in Scalar. NoInt1/2: x.
/// `xOut` must hold numRegressors(ds) values. Precondition: row < ds.observations().
template <typename Scalar>
void designRow(const NistDataset& ds, std::size_t row, Scalar* xOut, Scalar& yOut) {
    const std::vector<std::string>& xs = ds.xText.at(row);
    yOut = parseNistScalar<Scalar>(ds.yText.at(row));
    if (ds.predictors == 1) {
        const Scalar x = parseNistScalar<Scalar>(xs[0]);
        Scalar p = x;
        for (int k = 0; k < ds.degree; ++k) {
            if (k > 0) p = p * x;
            xOut[k] = p;
        }
    } else {
        for (std::size_t c = 0; c < xs.size(); ++c) xOut[c] = parseNistScalar<Scalar>(xs[c]);
    }
}

/// Log relative error: the number of correct significant digits of `computed` against
/// `certified` (McCullough, B. D. (1998), "Assessing the Reliability of Statistical Software:
/// Part I", The American Statistician 52(4), 358-366; see also tests/data/nist/SOURCE.md).
///
///   LRE = -log10(|q - c| / |c|)   for c != 0
///   LRE = -log10(|q|)             for c == 0 (absolute form)
///
/// clamped to [0, cap]; an exact match gives cap, a NaN or infinite `computed` gives 0.
inline double lre(long double computed, long double certified, double cap = 15.0) {
    if (!std::isfinite(computed) || !std::isfinite(certified)) return 0.0;
    if (computed == certified) return cap;
    const long double err = std::fabs(computed - certified);
    const long double rel = certified == 0 ? err : err / std::fabs(certified);
    const long double v = -std::log10(rel);
    if (!(v > 0)) return 0.0;
    if (v >= static_cast<long double>(cap)) return cap;
    return static_cast<double>(v);
}

}  // namespace rowfold_test
