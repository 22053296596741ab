// Trace CSV and the thinned in-memory trajectories for the plot.
#include "trace.hpp"

#include <cmath>
#include <iomanip>

#include "comparison.hpp"

namespace rowfold_compare {
namespace {

void cell(std::ostream& out, double v) {
  out << ',';
  if (std::isfinite(v)) out << v;  // non-finite values stay empty
}

/// CSV-quotes a header name when it needs it.
std::string csvName(const std::string& name) {
  if (name.find_first_of(",\"\r\n") == std::string::npos) return name;
  std::string q = "\"";
  for (char c : name) q += c == '"' ? std::string("\"\"") : std::string(1, c);
  return q + "\"";
}

}  // namespace

TraceRecorder::TraceRecorder(const Settings& s, std::vector<std::string> terms, std::string title)
    : m_intercept(s.intercept),
      m_level(s.level),
      m_summary(static_cast<Eigen::Index>(terms.size()) - (s.intercept ? 1 : 0)) {
  m_data.title = std::move(title);
  m_data.terms = std::move(terms);
  m_data.level = s.level;
  if (!s.traceFile.empty()) {
    m_trace = std::make_unique<OutputFile>(s.traceFile);
    std::ostream& o = m_trace->stream();
    o << std::setprecision(17) << "sample,solver,prediction_error,residual_se";
    for (const std::string& t : m_data.terms) o << ',' << csvName(t) << ',' << csvName(t + "_se");
    o << '\n';
  }
  if (!s.plotFile.empty()) m_plot = std::make_unique<OutputFile>(s.plotFile);
}

void TraceRecorder::record(std::size_t index, const Contender& c, std::uint64_t sample, double predictionError) {
  if (index == 0) {
    thinIfFull();
    ++m_calls;
  }
  if (c.summarize(m_summary, m_level) != rowfold::Status::ok) return;  // no fit yet
  const std::size_t nTerms = m_data.terms.size();
  if (m_trace) {
    std::ostream& o = m_trace->stream();
    o << sample << ',' << c.name();
    cell(o, predictionError);
    cell(o, m_summary.residualStandardError);
    for (std::size_t t = 0; t < nTerms; ++t) {
      const TermValues v = termValues(m_summary, m_intercept, t);
      cell(o, v.estimate);
      cell(o, v.standardError);
    }
    o << '\n';
  }
  if (!m_plot || (m_calls - 1) % m_stride != 0) return;
  if (m_data.series.size() <= index) m_data.series.resize(index + 1);
  PlotSeries& series = m_data.series[index];
  series.solver = c.name();
  PlotPoint p;
  p.sample = sample;
  p.predictionError = predictionError;
  p.residualSe = m_summary.residualStandardError;
  for (std::size_t t = 0; t < nTerms; ++t) {
    const TermValues v = termValues(m_summary, m_intercept, t);
    p.estimate.push_back(v.estimate);
    p.lower.push_back(v.lower);
    p.upper.push_back(v.upper);
  }
  series.points.push_back(std::move(p));
}

void TraceRecorder::thinIfFull() {
  bool full = false;
  for (const PlotSeries& s : m_data.series) full = full || s.points.size() >= kMaxPlotPoints;
  if (!full) return;
  // Keep every other point and double the stride: the points stay evenly spaced.
  for (PlotSeries& s : m_data.series) {
    std::size_t kept = 0;
    for (std::size_t i = 0; i < s.points.size(); i += 2, ++kept)
      if (kept != i) s.points[kept] = std::move(s.points[i]);  // no self-move of point 0
    s.points.resize(kept);
  }
  m_stride *= 2;  // kept calls stay those with (call - 1) % stride == 0
}

void TraceRecorder::commit() {
  if (m_plot) {
    writeSvg(m_plot->stream(), m_data);
    m_plot->commit();
  }
  if (m_trace) m_trace->commit();
}

}  // namespace rowfold_compare
