// Checks the NIST StRD loader (tests/support/nist.hpp) against values printed in the .dat files
// themselves, and the LRE score against its definition (McCullough 1998, Am. Stat. 52(4)).
// Data: NIST ITL Statistical Reference Datasets, linear least squares; origin and md5sums in
// tests/data/nist/SOURCE.md.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdlib>
#include <limits>
#include <string>
#include <vector>

#include "support/nist.hpp"

using rowfold_test::lre;
using rowfold_test::loadNist;
using rowfold_test::NistDataset;

namespace {

struct Expected {
    const char* name;
    std::size_t n;       // observations stated in the file header
    std::size_t params;  // certified B lines
    int predictors;
    int degree;
    bool intercept;
    std::size_t regressors;
};

const Expected kExpected[] = {
    {"Norris", 36, 2, 1, 1, true, 1},     {"Pontius", 40, 3, 1, 2, true, 2},
    {"NoInt1", 11, 1, 1, 1, false, 1},    {"NoInt2", 3, 1, 1, 1, false, 1},
    {"Filip", 82, 11, 1, 10, true, 10},   {"Longley", 16, 7, 6, 0, true, 6},
    {"Wampler1", 21, 6, 1, 5, true, 5},   {"Wampler2", 21, 6, 1, 5, true, 5},
    {"Wampler3", 21, 6, 1, 5, true, 5},   {"Wampler4", 21, 6, 1, 5, true, 5},
    {"Wampler5", 21, 6, 1, 5, true, 5},
};

}  // namespace

TEST_CASE("nist: every dataset loads with the stated shape") {
    for (const Expected& e : kExpected) {
        CAPTURE(e.name);
        const NistDataset ds = loadNist(e.name);
        CHECK(ds.name == e.name);
        CHECK(ds.y.size() == e.n);
        CHECK(ds.yText.size() == e.n);
        REQUIRE(ds.x.size() == e.n);
        REQUIRE(ds.xText.size() == e.n);
        for (std::size_t r = 0; r < e.n; ++r) {
            CHECK(ds.x[r].size() == static_cast<std::size_t>(e.predictors));
            CHECK(ds.xText[r].size() == static_cast<std::size_t>(e.predictors));
        }
        CHECK(ds.coef.size() == e.params);
        CHECK(ds.coefSd.size() == e.params);
        CHECK(ds.predictors == e.predictors);
        CHECK(ds.degree == e.degree);
        CHECK(ds.intercept == e.intercept);
        CHECK(rowfold_test::numRegressors(ds) == e.regressors);
        CHECK(ds.rSquared > 0.0L);
        CHECK(ds.rSquared <= 1.0L);
        CHECK(ds.residualSd >= 0.0L);
    }
}

TEST_CASE("nist: Longley certified values and data") {
    const NistDataset ds = loadNist("Longley");
    REQUIRE(ds.coef.size() == 7);
    CHECK(ds.coef[0] == -3482258.63459582L);
    CHECK(ds.coefSd[0] == 890420.383607373L);
    CHECK(ds.coef[2] == -0.358191792925910E-01L);  // E-01 exponent in the file
    CHECK(ds.coefText[2] == "-0.358191792925910E-01");
    CHECK(ds.coef[6] == 1829.15146461355L);
    CHECK(ds.coefSd[6] == 455.478499142212L);
    CHECK(ds.residualSd == 304.854073561965L);
    CHECK(ds.rSquared == 0.995479004577296L);
    // First and last data rows: y x1 .. x6.
    CHECK(ds.yText.front() == "60323");
    CHECK(ds.xText.front() ==
          std::vector<std::string>{"83.0", "234289", "2356", "1590", "107608", "1947"});
    CHECK(ds.y.front() == 60323.0L);
    CHECK(ds.x.front()[0] == 83.0L);
    CHECK(ds.y.back() == 70551.0L);
    CHECK(ds.x.back()[5] == 1962.0L);
}

TEST_CASE("nist: spot values in the other datasets") {
    SUBCASE("Norris") {
        const NistDataset ds = loadNist("Norris");
        CHECK(ds.coef[0] == -0.262323073774029L);
        CHECK(ds.coef[1] == 1.00211681802045L);
        CHECK(ds.residualSd == 0.884796396144373L);
        CHECK(ds.rSquared == 0.999993745883712L);
    }
    SUBCASE("NoInt1: no intercept, one coefficient") {
        const NistDataset ds = loadNist("NoInt1");
        CHECK(ds.coef[0] == 2.07438016528926L);
        CHECK(ds.coefSd[0] == 0.165289256198347E-01L);
        CHECK(ds.residualSd == 3.56753034006338L);  // line has trailing blanks
        CHECK(ds.rSquared == 0.999365492298663L);
        CHECK(ds.xText.front()[0] == "60");
        CHECK(ds.yText.back() == "140");
    }
    SUBCASE("NoInt2") {
        const NistDataset ds = loadNist("NoInt2");
        CHECK(ds.coef[0] == 0.727272727272727L);
        CHECK(ds.residualSd == 0.369274472937998L);
        CHECK(ds.y == std::vector<long double>{3, 4, 4});
    }
    SUBCASE("Filip: B10 and E-05 exponents") {
        const NistDataset ds = loadNist("Filip");
        CHECK(ds.coef[0] == -1467.48961422980L);
        CHECK(ds.coef[10] == -0.402962525080404E-04L);
        CHECK(ds.coefSd[10] == 0.896632837373868E-05L);
        CHECK(ds.residualSd == 0.334801051324544E-02L);
        CHECK(ds.rSquared == 0.996727416185620L);
        CHECK(ds.yText.front() == "0.8116");
        CHECK(ds.xText.front()[0] == "-6.860120914");
    }
    SUBCASE("Wampler1: exact fit, zero SDs") {
        const NistDataset ds = loadNist("Wampler1");
        for (std::size_t k = 0; k < 6; ++k) {
            CHECK(ds.coef[k] == 1.0L);
            CHECK(ds.coefSd[k] == 0.0L);
        }
        CHECK(ds.residualSd == 0.0L);
        CHECK(ds.rSquared == 1.0L);
    }
    SUBCASE("Wampler3: y printed with a bare trailing point") {
        const NistDataset ds = loadNist("Wampler3");
        CHECK(ds.yText.front() == "760.");
        CHECK(ds.y.front() == 760.0L);
        CHECK(ds.y[1] == -2042.0L);
    }
    SUBCASE("Wampler5") {
        const NistDataset ds = loadNist("Wampler5");
        CHECK(ds.residualSd == 23601450.2379268L);
        CHECK(ds.rSquared == 0.224668921574940E-02L);
    }
}

TEST_CASE("nist: designRow forms powers in the requested Scalar") {
    SUBCASE("Filip, double: x, x^2, ... x^10 by repeated multiplication") {
        const NistDataset ds = loadNist("Filip");
        REQUIRE(rowfold_test::numRegressors(ds) == 10);
        double row[10];
        double y = 0;
        rowfold_test::designRow(ds, 0, row, y);
        const double x = std::strtod("-6.860120914", nullptr);
        CHECK(y == std::strtod("0.8116", nullptr));
        double p = x;
        CHECK(row[0] == p);
        for (int k = 1; k < 10; ++k) {
            p = p * x;
            CHECK(row[k] == p);
        }
    }
    SUBCASE("Filip, float: parsed from text, not rounded from long double") {
        const NistDataset ds = loadNist("Filip");
        float row[10];
        float y = 0;
        rowfold_test::designRow(ds, 0, row, y);
        CHECK(row[0] == std::strtof("-6.860120914", nullptr));
        CHECK(row[1] == row[0] * row[0]);
        CHECK(y == std::strtof("0.8116", nullptr));
    }
    SUBCASE("Longley, long double: the six columns as printed") {
        const NistDataset ds = loadNist("Longley");
        long double row[6];
        long double y = 0;
        rowfold_test::designRow(ds, 15, row, y);
        CHECK(y == 70551.0L);
        CHECK(row[0] == 116.9L);
        CHECK(row[1] == 554894.0L);
        CHECK(row[5] == 1962.0L);
    }
    SUBCASE("NoInt2: just x") {
        const NistDataset ds = loadNist("NoInt2");
        REQUIRE(rowfold_test::numRegressors(ds) == 1);
        double row[1];
        double y = 0;
        rowfold_test::designRow(ds, 2, row, y);
        CHECK(row[0] == 6.0);
        CHECK(y == 4.0);
    }
}

TEST_CASE("nist: unknown dataset is an error") {
    CHECK_THROWS(loadNist("NoSuchDataset"));
}

TEST_CASE("lre: relative, absolute, clamping and cap") {
    CHECK(std::fabs(lre(1.0000001, 1.0) - 7.0) < 0.01);
    CHECK(std::fabs(lre(-2.0000002L, -2.0L) - 7.0) < 0.01);
    // Absolute form when the certified value is 0.
    CHECK(std::fabs(lre(1e-10L, 0.0L) - 10.0) < 1e-9);
    CHECK(std::fabs(lre(-1e-3L, 0.0L) - 3.0) < 1e-9);
    CHECK(lre(0.0L, 0.0L) == 15.0);
    // Cap: exact match, and agreement beyond the cap.
    CHECK(lre(304.854073561965L, 304.854073561965L) == 15.0);
    CHECK(lre(1.0L + 1e-18L, 1.0L) == 15.0);
    CHECK(lre(1.0L + 1e-18L, 1.0L, 12.0) == 12.0);
    CHECK(lre(3.0L, 3.0L, 10.0) == 10.0);
    // Clamped at 0 when not even the leading digit agrees.
    CHECK(lre(100.0L, 1.0L) == 0.0);
    CHECK(lre(-1.0L, 1.0L) == 0.0);
    CHECK(lre(5.0L, 0.0L) == 0.0);
    // Non-finite computed values score 0.
    CHECK(lre(std::numeric_limits<long double>::quiet_NaN(), 1.0L) == 0.0);
    CHECK(lre(std::numeric_limits<long double>::infinity(), 1.0L) == 0.0);
    CHECK(lre(-std::numeric_limits<long double>::infinity(), 0.0L) == 0.0);
}
