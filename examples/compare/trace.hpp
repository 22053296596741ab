/// @file
/// Coefficient trajectories: a CSV row per traced solver every N used rows (--trace), and a
/// bounded, evenly thinned copy in memory for the SVG plot (--plot), so memory stays constant.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "contender.hpp"
#include "output_file.hpp"

namespace rowfold_compare {

struct PlotPoint {
  std::uint64_t sample = 0;
  std::vector<double> estimate, lower, upper;  ///< per term (intercept first when fitted)
  double predictionError = 0.0;                ///< y - yhat of the row, before it was folded
  double residualSe = 0.0;
};

struct PlotSeries {
  std::string solver;
  std::vector<PlotPoint> points;
};

struct PlotData {
  std::string title;
  std::vector<std::string> terms;
  double level = 0.95;
  std::vector<PlotSeries> series;
};

class TraceRecorder {
 public:
  /// At most this many points per solver are kept for the plot (older ones are thinned).
  static constexpr std::size_t kMaxPlotPoints = 1200;

  TraceRecorder(const Settings& settings, std::vector<std::string> terms, std::string title);

  /// Records solver `index` (in the order of the traced solvers) after `sample` used rows.
  void record(std::size_t index, const Contender& c, std::uint64_t sample, double predictionError);
  /// Writes the plot (if asked for) and renames both files to their final names.
  void commit();

 private:
  void thinIfFull();

  bool m_intercept;
  double m_level;
  std::unique_ptr<OutputFile> m_trace, m_plot;
  PlotData m_data;
  Summary m_summary;
  std::uint64_t m_calls = 0, m_stride = 1;
};

/// Writes `data` as a standalone SVG: one panel per term (estimates of every solver with their
/// confidence bands) and one panel with the prediction errors.
void writeSvg(std::ostream& out, const PlotData& data);

}  // namespace rowfold_compare
