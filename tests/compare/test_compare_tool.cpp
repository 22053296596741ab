// End-to-end tests of rowfold-compare: the tool is run on CSV files written here.
//
// All CSV files except the Longley one are INVENTED for these tests: rows follow an exact
// invented model (y = 2 + 3 a - 0.5 b, or through the origin), so the expected coefficients are
// the invented ones, not values computed by the code under test. The Longley file is a CSV
// rendering, made at test time, of the NIST StRD file tests/data/nist/Longley.dat (tokens copied
// as printed), checked against the NIST StRD Longley certified values in that file.
#include <doctest/doctest.h>
#include <sys/wait.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "support/nist.hpp"

namespace {

namespace fs = std::filesystem;
using nlohmann::json;

struct Run {
  int code = -1;
  std::string out, err;
};

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

/// A fresh, empty directory for one case.
fs::path caseDir(const std::string& name) {
  const fs::path d = fs::path(ROWFOLD_COMPARE_WORK) / name;
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}

void writeFile(const fs::path& p, const std::string& text) {
  std::ofstream out(p, std::ios::binary);
  out << text;
}

/// Runs the tool in `dir` with `args` (shell syntax); stdout and stderr are captured outside it.
/// In a cross build ROWFOLD_COMPARE_RUNNER is the emulator command (qemu-user), else empty.
Run runTool(const fs::path& dir, const std::string& args) {
  const std::string base = dir.string();
  const std::string cmd = "cd '" + base + "' && " + std::string(ROWFOLD_COMPARE_RUNNER) + " '" +
                          std::string(ROWFOLD_COMPARE_EXE) + "' " + args + " >'" + base + ".stdout' 2>'" + base +
                          ".stderr'";
  const int status = std::system(cmd.c_str());
  Run r;
  r.code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  r.out = slurp(base + ".stdout");
  r.err = slurp(base + ".stderr");
  return r;
}

/// Invented rows of the exact model y = 2 + 3 a - 0.5 b (a, b small integers: y is exact in
/// binary floating point).
std::string exactRows(int n, int firstIndex = 0) {
  std::string s;
  for (int i = firstIndex; i < firstIndex + n; ++i) {
    const int a = i % 7, b = (i * i) % 11;
    s += "t" + std::to_string(i) + "," + std::to_string(a) + "," + std::to_string(b) + "," +
         std::to_string(2.0 + 3.0 * a - 0.5 * b) + "\n";
  }
  return s;
}

/// A fresh case directory `name` holding `file` with `text`; runs the tool there with `args`
/// and requires success with nothing on stderr.
Run runOk(fs::path& dir, const std::string& name, const std::string& file, const std::string& text,
          const std::string& args) {
  dir = caseDir(name);
  writeFile(dir / file, text);
  Run r = runTool(dir, file + " " + args);
  INFO(r.err);
  REQUIRE(r.code == 0);
  CHECK(r.err.empty());  // stderr is not a terminal here: no progress line, and no warnings
  return r;
}

const char* const kSolvers[] = {"BatchQr", "GivensQr", "NormalEquations", "ForgettingRls"};

/// Looks a solver up in the JSON by name.
const json& solver(const json& doc, const std::string& name) {
  for (const json& s : doc.at("solvers"))
    if (s.at("name") == name) return s;
  FAIL("solver not in the JSON: " << name);
  return doc;
}

/// Minimal XML well-formedness check: balanced, properly nested tags, quoted attributes, one
/// root element, entities only &lt; &gt; &amp; &quot; &apos; or numeric.
bool wellFormedXml(const std::string& s, std::string& rootName) {
  std::vector<std::string> stack;
  int roots = 0;
  for (std::size_t i = 0; i < s.size();) {
    if (s[i] == '&') {
      const std::size_t semi = s.find(';', i);
      if (semi == std::string::npos) return false;
      const std::string e = s.substr(i, semi - i + 1);
      if (e != "&lt;" && e != "&gt;" && e != "&amp;" && e != "&quot;" && e != "&apos;" && e.rfind("&#", 0) != 0)
        return false;
      i = semi + 1;
      continue;
    }
    if (s[i] != '<') {
      ++i;
      continue;
    }
    if (s.compare(i, 2, "<?") == 0) {
      const std::size_t end = s.find("?>", i);
      if (end == std::string::npos) return false;
      i = end + 2;
      continue;
    }
    std::size_t j = i + 1;
    bool inQuote = false;
    for (; j < s.size() && (inQuote || s[j] != '>'); ++j) {
      if (s[j] == '"') inQuote = !inQuote;
      if (!inQuote && s[j] == '<') return false;
    }
    if (j >= s.size()) return false;
    std::string tag = s.substr(i + 1, j - i - 1);
    i = j + 1;
    if (!tag.empty() && tag[0] == '/') {
      const std::string name = tag.substr(1);
      if (stack.empty() || stack.back() != name) return false;
      stack.pop_back();
      continue;
    }
    const bool selfClosing = !tag.empty() && tag.back() == '/';
    const std::string name = tag.substr(0, tag.find_first_of(" \t\n/"));
    if (name.empty()) return false;
    if (stack.empty()) {
      ++roots;
      rootName = name;
    }
    if (!selfClosing) stack.push_back(name);
  }
  return stack.empty() && roots == 1;
}

}  // namespace

TEST_CASE("compare tool: exact invented model, every solver, JSON fields") {
  fs::path d;
  const Run r =
      runOk(d, "exact", "plant.csv", "time,a,b,y\n" + exactRows(400), "--response y --inputs a,b --json result.json");
  CHECK(r.out.find("estimate (std. error)") != std::string::npos);
  CHECK(r.out.find("ns/sample") != std::string::npos);
  const json doc = json::parse(slurp(d / "result.json"));
  CHECK(doc.at("tool") == "rowfold-compare");
  CHECK(doc.at("response") == "y");
  CHECK(doc.at("inputs") == json::array({"a", "b"}));
  CHECK(doc.at("rows").at("used") == 400);
  CHECK(doc.at("rows").at("skipped_missing") == 0);
  CHECK(doc.at("reference").at("significand_bits").get<int>() >= 53);
  REQUIRE(doc.at("solvers").size() == 4);
  const double truth[] = {2.0, 3.0, -0.5};  // the invented model
  for (const std::string name : kSolvers) {
    CAPTURE(name);
    const json& s = solver(doc, name);
    CHECK(s.at("status") == "ok");
    CHECK(s.at("rows_folded") == 400);
    for (const char* field : {"residual_standard_error", "r_squared", "ns_per_sample", "max_relative_deviation",
                              "conditioning", "warnings", "effective_samples"})
      CHECK(s.contains(field));
    REQUIRE(s.at("terms").size() == 3);
    for (int t = 0; t < 3; ++t) {
      const json& term = s.at("terms")[static_cast<std::size_t>(t)];
      for (const char* field : {"estimate", "std_error", "lower", "upper", "correct_digits", "relative_deviation"})
        CHECK(term.contains(field));
      // Tolerance 1e-9: exact data, so only rounding separates the fit from the invented truth.
      CHECK(std::fabs(term.at("estimate").get<double>() - truth[t]) < 1e-9);
    }
    CHECK(s.at("r_squared").get<double>() > 1.0 - 1e-12);
  }
}

TEST_CASE("compare tool: missing values are skipped and counted, or stop the run") {
  const fs::path d = caseDir("missing");
  // Invented: lines 4, 7 and 9 hold a missing value (empty, NA, nan) in a chosen column; the
  // "note" column holds text that is never parsed.
  std::string text = "time,a,b,y,note\n";
  int i = 0;
  for (int line = 2; line <= 60; ++line, ++i) {
    const int a = i % 7, b = (i * i) % 11;
    std::string as = std::to_string(a), ys = std::to_string(2.0 + 3.0 * a - 0.5 * b);
    if (line == 4) as = "";
    if (line == 7) ys = "NA";
    if (line == 9) as = "nan";
    text += "t," + as + "," + std::to_string(b) + "," + ys + ",free text\n";
  }
  writeFile(d / "gaps.csv", text);
  const Run skip = runTool(d, "gaps.csv -r y -i a,b -s givens --json skip.json");
  INFO(skip.err);
  REQUIRE(skip.code == 0);
  const json doc = json::parse(slurp(d / "skip.json"));
  CHECK(doc.at("rows").at("data_lines") == 59);
  CHECK(doc.at("rows").at("skipped_missing") == 3);
  CHECK(doc.at("rows").at("used") == 56);
  CHECK(doc.at("rows").at("first_skipped_line") == 4);
  CHECK(std::fabs(solver(doc, "GivensQr").at("terms")[1].at("estimate").get<double>() - 3.0) < 1e-9);
  CHECK(skip.out.find("3 skipped with a missing value (first at line 4)") != std::string::npos);

  const Run stop = runTool(d, "gaps.csv -r y -i a,b --on-missing stop --json stop.json --trace stop.csv");
  CHECK(stop.code != 0);
  CHECK(stop.err.find("gaps.csv, line 4, column 2") != std::string::npos);
  CHECK_FALSE(fs::exists(d / "stop.json"));
  CHECK_FALSE(fs::exists(d / "stop.csv"));
}

TEST_CASE("compare tool: bad files name file, line and column, exit non-zero, leave no output") {
  struct Case {
    const char* name;
    std::string text;
    const char* args;
    const char* where;  ///< expected "FILE, line L, column C"
  };
  const std::string head = "time,a,b,y,w\n";
  const std::string good = "t,1,2,3,1\nt,2,5,4,1\nt,0,1,7,1\n";
  std::string late = head;  // an error after many good rows: the trace file was already being written
  for (int i = 0; i < 300; ++i) late += "t," + std::to_string(i % 5) + "," + std::to_string(i % 3) + ",1,1\n";
  late += "t,1,2,oops,1\n";
  const Case cases[] = {
      {"empty", "", "", "empty.csv, line 1, column 1"},
      {"header_only", head, "", "header_only.csv, line 2, column 1"},
      {"bad_number", head + good + "t,4,x5,6,1\n", "", "bad_number.csv, line 5, column 3"},
      {"ragged_short", head + good + "t,4,5\n", "", "ragged_short.csv, line 5, column 4"},
      {"ragged_long", head + "t,4,5,6,1,9\n", "", "ragged_long.csv, line 2, column 6"},
      {"missing_name", head + good, "-r y -i a,feed", "missing_name.csv, line 1, column 6"},
      {"missing_number", head + good, "-r 9 -i a,b", "missing_number.csv, line 1, column 6"},
      {"open_quote", head + "t,\"4,5,6,1\n", "", "open_quote.csv, line 2, column 2"},
      {"negative_weight", head + good + "t,1,1,1,-2\n", "-r y -i a,b -w w", "negative_weight.csv, line 5, column 5"},
      {"all_missing", head + "t,NA,1,1,1\nt,1,,1,1\n", "", "all_missing.csv, line 2, column 1"},
      {"late_error", late, "-r y -i a,b --every 10", "late_error.csv, line 302, column 4"},
  };
  for (const Case& c : cases) {
    const std::string caseName = c.name;
    CAPTURE(caseName);
    const fs::path d = caseDir(std::string("bad_") + c.name);
    const std::string file = std::string(c.name) + ".csv";
    writeFile(d / file, c.text);
    const std::string args =
        std::string(*c.args ? c.args : "-r y -i a,b") + " " + file + " --json out.json --trace out.csv --plot out.svg";
    const Run r = runTool(d, args);
    INFO(r.err);
    CHECK(r.code != 0);
    CHECK(r.err.find(c.where) != std::string::npos);
    std::size_t files = 0;
    for (const auto& entry : fs::directory_iterator(d)) {
      ++files;
      CHECK(entry.path().filename() == file);  // no output and no temporary file left behind
    }
    CHECK(files == 1);
  }
  const fs::path d = caseDir("bad_no_file");
  const Run r = runTool(d, "absent.csv -r y -i a,b");
  CHECK(r.code != 0);
  CHECK(r.err.find("cannot open absent.csv") != std::string::npos);
  const Run usage = runTool(d, "absent.csv -r y -i a,b --solver quickest");
  CHECK(usage.code != 0);
  CHECK(usage.err.find("unknown solver") != std::string::npos);
  const Run batchTrace = runTool(d, "absent.csv -r y -i a,b --solver BatchQr --trace t.csv");
  CHECK(batchTrace.code != 0);
  CHECK(batchTrace.err.find("need an online solver") != std::string::npos);
  CHECK_FALSE(fs::exists(d / "t.csv"));
}

TEST_CASE("compare tool: --trace and --plot write trajectories and a well-formed SVG") {
  // Invented; a header name with XML markup characters checks the SVG escaping.
  fs::path d;
  runOk(d, "trace", "run.csv", "time,a,\"b<&\"\"x\"\"\",y\n" + exactRows(1000),
        "-r y -i 2,3 --every 100 --trace traj.csv --plot traj.svg");
  std::istringstream trace(slurp(d / "traj.csv"));
  std::string line;
  std::getline(trace, line);
  CHECK(
      line ==
      "sample,solver,prediction_error,residual_se,intercept,intercept_se,a,a_se,\"b<&\"\"x\"\"\",\"b<&\"\"x\"\"_se\"");
  int rows = 0;
  while (std::getline(trace, line)) {
    ++rows;
    // sample,solver,error,s,b0,se0,b1,se1,...: b1 is the invented slope 3 at every point.
    std::vector<std::string> f;
    std::stringstream ss(line);
    for (std::string cell; std::getline(ss, cell, ',');) f.push_back(cell);
    REQUIRE(f.size() == 10);
    CHECK(f[1] != "BatchQr");  // BatchQr is not traced
    CHECK(std::fabs(std::stod(f[6]) - 3.0) < 1e-9);
  }
  CHECK(rows == 10 * 3);  // 1000 rows / every 100, three online solvers
  const std::string svg = slurp(d / "traj.svg");
  std::string root;
  CHECK(wellFormedXml(svg, root));
  CHECK(root == "svg");
  CHECK(svg.find("b&lt;&amp;&quot;x&quot;") != std::string::npos);
  CHECK(svg.find("<polyline") != std::string::npos);
  CHECK(svg.find("<polygon") != std::string::npos);  // confidence bands
  CHECK(svg.find("prediction error") != std::string::npos);
}

TEST_CASE("compare tool: a long trace is thinned for the plot and stays well-formed") {
  fs::path d;  // invented rows, as above
  runOk(d, "long_trace", "long.csv", "time,a,b,y\n" + exactRows(3000),
        "-r y -i a,b -s givens,rls --every 1 --plot long.svg");
  const std::string svg = slurp(d / "long.svg");
  std::string root;
  CHECK(wellFormedXml(svg, root));
  // 3000 trace points per solver are thinned to at most TraceRecorder::kMaxPlotPoints (1200):
  // one circle per kept point and solver in the prediction-error panel.
  std::size_t circles = 0;
  for (std::size_t p = svg.find("<circle"); p != std::string::npos; p = svg.find("<circle", p + 1)) ++circles;
  CHECK(circles > 2 * 600);
  CHECK(circles <= 2 * 1200);
}

TEST_CASE("compare tool: weights, no intercept, separator and BatchQr capacity") {
  // Invented: y = 3 a - 0.5 b exactly, through the origin; weights 0.5 to 2.
  std::string text = "a;b;y;w\n";
  for (int i = 0; i < 300; ++i) {
    const int a = 1 + i % 7, b = (i * i) % 11;
    text += std::to_string(a) + ";" + std::to_string(b) + ";" + std::to_string(3.0 * a - 0.5 * b) + ";" +
            std::to_string((1 + i % 4) * 0.5) + "\n";
  }
  fs::path d;
  const Run r = runOk(d, "options", "w.csv", text,
                      "-r y -i a,b -w w --no-intercept --separator ';' --capacity 100 --json w.json");
  const json doc = json::parse(slurp(d / "w.json"));
  CHECK(doc.at("intercept") == false);
  CHECK(doc.at("weights") == "w");
  for (const std::string name : {"GivensQr", "NormalEquations", "ForgettingRls"}) {
    CAPTURE(name);
    const json& s = solver(doc, name);
    REQUIRE(s.at("terms").size() == 2);
    CHECK(std::fabs(s.at("terms")[0].at("estimate").get<double>() - 3.0) < 1e-9);
    CHECK(std::fabs(s.at("terms")[1].at("estimate").get<double>() + 0.5) < 1e-9);
  }
  const json& batch = solver(doc, "BatchQr");
  CHECK(batch.at("rows_refused") == 200);
  CHECK(batch.at("refusal") == "capacity_full");
  CHECK(batch.at("max_relative_deviation").is_null());  // it saw fewer rows than the reference
  CHECK(r.out.find("BatchQr: Its row store was full (--capacity)") != std::string::npos);
}

TEST_CASE("compare tool: --window fits the most recent rows only") {
  // Invented: the exact model changes at row 500, from y = 1 + 2 a + 0.5 b to y = 5 - a + 0.25 b.
  std::string text = "a,b,y\n";
  for (int i = 0; i < 1000; ++i) {
    const int a = i % 7, b = (i * i) % 11;
    text += std::to_string(a) + "," + std::to_string(b) + "," +
            std::to_string(i < 500 ? 1.0 + 2.0 * a + 0.5 * b : 5.0 - a + 0.25 * b) + "\n";
  }
  fs::path d;
  runOk(d, "window", "shift.csv", text, "-r y -i a,b --window 200 --window-blocks 4 --json w.json");
  const json doc = json::parse(slurp(d / "w.json"));
  CHECK(doc.at("window").at("block_rows") == 50);
  const double truth[] = {5.0, -1.0, 0.25};  // the invented second regime
  for (const std::string name : kSolvers) {
    CAPTURE(name);
    const json& s = solver(doc, name);
    // 1000 rows = 20 blocks of 50: every window holds exactly the last 200 rows (window.hpp).
    CHECK(s.at("rows_in_fit") == 200);
    CHECK(s.at("max_relative_deviation").is_number());
    for (std::size_t t = 0; t < 3; ++t)
      CHECK(std::fabs(s.at("terms")[t].at("estimate").get<double>() - truth[t]) < 1e-9);
  }
  // N = 190, B = 4: b = 48, W = 192; 1000 = 20 * 48 + 40, so the block windows hold 232 rows and
  // BatchQr's ring 192: BatchQr is not compared with the reference.
  runOk(d, "window_uneven", "shift.csv", text, "-r y -i a,b --window 190 --window-blocks 4 --json u.json");
  const json uneven = json::parse(slurp(d / "u.json"));
  CHECK(solver(uneven, "BatchQr").at("rows_in_fit") == 192);
  CHECK(solver(uneven, "BatchQr").at("max_relative_deviation").is_null());
  CHECK(solver(uneven, "GivensQr").at("rows_in_fit") == 232);
  CHECK(solver(uneven, "GivensQr").at("max_relative_deviation").is_number());
}

TEST_CASE("compare tool: NIST StRD Longley certified values from a CSV rendering") {
  const rowfold_test::NistDataset ds = rowfold_test::loadNist("Longley");
  REQUIRE(ds.predictors == 6);
  std::string text = "y,x1,x2,x3,x4,x5,x6\n";
  for (std::size_t i = 0; i < ds.observations(); ++i) {
    text += ds.yText[i];
    for (const std::string& x : ds.xText[i]) text += "," + x;
    text += "\n";
  }
  fs::path d;
  runOk(d, "longley", "longley.csv", text, "-r y -i x1,x2,x3,x4,x5,x6 --json longley.json");
  const json doc = json::parse(slurp(d / "longley.json"));
  // NIST StRD Longley certified values (tests/data/nist/Longley.dat, certified block). Tolerance:
  // log relative error (LRE, McCullough 1998) >= 9 for every estimate, standard deviation,
  // residual standard deviation and R^2, for every solver; the library's own NIST suite
  // (tests/test_nist.cpp) holds the solvers to 11-14 digits on Longley, so 9 leaves room for
  // the decimal round trip through the CSV and JSON files. Measured (x86-64, g++ 12): LRE >= 12.1
  // (NormalEquations' coefficients), >= 12.9 for the standard deviations.
  for (const std::string name : kSolvers) {
    CAPTURE(name);
    const json& s = solver(doc, name);
    REQUIRE(s.at("terms").size() == 7);
    for (std::size_t t = 0; t < 7; ++t) {
      CAPTURE(t);
      CHECK(rowfold_test::lre(s.at("terms")[t].at("estimate").get<double>(), ds.coef[t]) >= 9.0);
      CHECK(rowfold_test::lre(s.at("terms")[t].at("std_error").get<double>(), ds.coefSd[t]) >= 9.0);
    }
    CHECK(rowfold_test::lre(s.at("residual_standard_error").get<double>(), ds.residualSd) >= 9.0);
    CHECK(rowfold_test::lre(s.at("r_squared").get<double>(), ds.rSquared) >= 9.0);
  }
}
