// A small standalone SVG of the trajectories: one panel per term, one for the prediction error.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ostream>
#include <string>
#include <vector>

#include "trace.hpp"

namespace rowfold_compare {
namespace {

constexpr double kWidth = 900, kLeft = 90, kRight = 20, kPanel = 170, kGap = 50, kTop = 70;
const char* const kColors[] = {"#1f5fa8", "#c0392b", "#2e8b57", "#8e44ad", "#d68910"};

/// Text safe inside an XML element or attribute: escapes markup, keeps valid UTF-8, replaces
/// control characters and invalid bytes with '?'.
std::string xmlText(const std::string& s) {
  std::string out;
  for (std::size_t i = 0; i < s.size();) {
    const auto c = static_cast<unsigned char>(s[i]);
    std::size_t len = c < 0x80 ? 1 : (c >> 5) == 0x6 ? 2 : (c >> 4) == 0xE ? 3 : (c >> 3) == 0x1E ? 4 : 0;
    bool valid = len > 0 && i + len <= s.size();
    for (std::size_t k = 1; valid && k < len; ++k) valid = (static_cast<unsigned char>(s[i + k]) >> 6) == 0x2;
    if (!valid) {
      out += '?';
      ++i;
      continue;
    }
    if (len > 1) {
      out.append(s, i, len);
    } else if (c == '<') {
      out += "&lt;";
    } else if (c == '>') {
      out += "&gt;";
    } else if (c == '&') {
      out += "&amp;";
    } else if (c == '"') {
      out += "&quot;";
    } else if (c < 0x20 || c == 0x7F) {
      out += '?';
    } else {
      out += static_cast<char>(c);
    }
    i += len;
  }
  return out;
}

std::string num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.5g", v);
  return buf;
}

std::string coord(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f", v);
  return buf;
}

/// A value range and its mapping to pixels.
struct Axis {
  double lo = 0, hi = 1, pixLo = 0, pixHi = 1;
  double map(double v) const { return pixLo + (v - lo) / (hi - lo) * (pixHi - pixLo); }
};

void widen(Axis& a) {
  if (!(a.hi > a.lo) || !std::isfinite(a.hi - a.lo)) {
    const double c = std::isfinite(a.lo) ? a.lo : 0.0;
    const double d = std::max(1e-6 * std::fabs(c), 1e-12);
    a.lo = c - d;
    a.hi = c + d;
  }
  const double pad = 0.06 * (a.hi - a.lo);
  a.lo -= pad;
  a.hi += pad;
}

double niceStep(double range) {
  const double raw = range / 5.0;
  const double p = std::pow(10.0, std::floor(std::log10(raw)));
  for (double m : {1.0, 2.0, 5.0})
    if (raw <= m * p) return m * p;
  return 10.0 * p;
}

/// Frame, grid, ticks and title of one panel.
void frame(std::ostream& o, const Axis& x, const Axis& y, const std::string& title, int id) {
  o << "<g>\n<text x=\"" << kLeft << "\" y=\"" << coord(y.pixHi - 8) << "\" font-weight=\"bold\">" << xmlText(title)
    << "</text>\n";
  o << "<rect x=\"" << coord(x.pixLo) << "\" y=\"" << coord(y.pixHi) << "\" width=\"" << coord(x.pixHi - x.pixLo)
    << "\" height=\"" << coord(y.pixLo - y.pixHi) << "\" fill=\"none\" stroke=\"#444\"/>\n";
  o << "<clipPath id=\"clip" << id << "\"><rect x=\"" << coord(x.pixLo) << "\" y=\"" << coord(y.pixHi) << "\" width=\""
    << coord(x.pixHi - x.pixLo) << "\" height=\"" << coord(y.pixLo - y.pixHi) << "\"/></clipPath>\n";
  for (const Axis* a : {&y, &x}) {
    const double step = niceStep(a->hi - a->lo);
    if (!(step > 0) || !std::isfinite(step)) continue;
    int ticks = 0;
    for (double v = std::ceil(a->lo / step) * step; v <= a->hi && ticks < 20; v += step, ++ticks) {
      const double p = a->map(v);
      if (a == &y)
        o << "<line x1=\"" << coord(x.pixLo) << "\" x2=\"" << coord(x.pixHi) << "\" y1=\"" << coord(p) << "\" y2=\""
          << coord(p) << "\" stroke=\"#ddd\"/><text x=\"" << coord(x.pixLo - 6) << "\" y=\"" << coord(p + 4)
          << "\" text-anchor=\"end\">" << num(std::fabs(v) < 1e-9 * step ? 0.0 : v) << "</text>\n";
      else
        o << "<text x=\"" << coord(p) << "\" y=\"" << coord(y.pixLo + 15) << "\" text-anchor=\"middle\">" << num(v)
          << "</text>\n";
    }
  }
  o << "</g>\n";
}

/// Range of `value(point)` over the later 90 % of the points (the first fits are often wild).
template <typename F>
void rangeOf(const PlotData& d, F value, double& lo, double& hi) {
  lo = INFINITY;
  hi = -INFINITY;
  for (const PlotSeries& s : d.series)
    for (std::size_t i = s.points.size() / 10; i < s.points.size(); ++i) {
      const double v = value(s.points[i]);
      if (!std::isfinite(v)) continue;
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
}

void polyline(std::ostream& o, const std::vector<std::pair<double, double>>& pts, const char* color, int clip,
              const char* extra) {
  if (pts.empty()) return;
  o << "<polyline clip-path=\"url(#clip" << clip << ")\" fill=\"none\" stroke=\"" << color << "\" " << extra
    << " points=\"";
  for (const auto& p : pts) o << coord(p.first) << ',' << coord(p.second) << ' ';
  o << "\"/>\n";
}

void termPanel(std::ostream& o, const PlotData& d, std::size_t t, const Axis& x, Axis y, int id) {
  double lo, hi, bandLo, bandHi;
  rangeOf(
      d, [t](const PlotPoint& p) { return p.estimate[t]; }, lo, hi);
  rangeOf(
      d, [t](const PlotPoint& p) { return 0.5 * (p.upper[t] - p.lower[t]); }, bandLo, bandHi);
  y.lo = lo - (std::isfinite(bandLo) ? bandLo : 0.0);
  y.hi = hi + (std::isfinite(bandLo) ? bandLo : 0.0);
  widen(y);
  char level[16];
  std::snprintf(level, sizeof level, "%g", 100.0 * d.level);
  frame(o, x, y, d.terms[t] + "  (bands: " + level + " % confidence intervals)", id);
  for (std::size_t s = 0; s < d.series.size(); ++s) {
    const char* color = kColors[s % 5];
    std::vector<std::pair<double, double>> est, upper, lower;
    for (const PlotPoint& p : d.series[s].points) {
      const double px = x.map(static_cast<double>(p.sample));
      if (std::isfinite(p.estimate[t])) est.emplace_back(px, y.map(p.estimate[t]));
      if (std::isfinite(p.upper[t]) && std::isfinite(p.lower[t])) {
        upper.emplace_back(px, y.map(std::min(p.upper[t], y.hi + (y.hi - y.lo))));
        lower.emplace_back(px, y.map(std::max(p.lower[t], y.lo - (y.hi - y.lo))));
      }
    }
    if (!upper.empty()) {
      o << "<polygon clip-path=\"url(#clip" << id << ")\" fill=\"" << color << "\" fill-opacity=\"0.15\" points=\"";
      for (const auto& p : upper) o << coord(p.first) << ',' << coord(p.second) << ' ';
      for (auto it = lower.rbegin(); it != lower.rend(); ++it) o << coord(it->first) << ',' << coord(it->second) << ' ';
      o << "\"/>\n";
    }
    polyline(o, est, color, id, "stroke-width=\"1.5\"");
  }
}

void errorPanel(std::ostream& o, const PlotData& d, const Axis& x, Axis y, int id) {
  double lo, hi, sLo, sHi;
  rangeOf(
      d, [](const PlotPoint& p) { return p.predictionError; }, lo, hi);
  rangeOf(
      d, [](const PlotPoint& p) { return 2.0 * p.residualSe; }, sLo, sHi);
  const double m = std::max({std::isfinite(lo) ? std::fabs(lo) : 0.0, std::isfinite(hi) ? std::fabs(hi) : 0.0,
                             std::isfinite(sHi) ? sHi : 0.0});
  y.lo = -m;
  y.hi = m;
  widen(y);
  frame(o, x, y, "prediction error y - yhat (before the row is folded); dashed: +-2 residual SE", id);
  for (std::size_t s = 0; s < d.series.size(); ++s) {
    const char* color = kColors[s % 5];
    std::vector<std::pair<double, double>> up, down;
    o << "<g clip-path=\"url(#clip" << id << ")\" fill=\"" << color << "\">";
    for (const PlotPoint& p : d.series[s].points) {
      const double px = x.map(static_cast<double>(p.sample));
      if (std::isfinite(p.predictionError))
        o << "<circle cx=\"" << coord(px) << "\" cy=\"" << coord(y.map(p.predictionError)) << "\" r=\"1.5\"/>";
      if (std::isfinite(p.residualSe)) {
        up.emplace_back(px, y.map(2.0 * p.residualSe));
        down.emplace_back(px, y.map(-2.0 * p.residualSe));
      }
    }
    o << "</g>\n";
    polyline(o, up, color, id, "stroke-dasharray=\"4 3\"");
    polyline(o, down, color, id, "stroke-dasharray=\"4 3\"");
  }
}

}  // namespace

void writeSvg(std::ostream& o, const PlotData& d) {
  const std::size_t panels = d.terms.size() + 1;
  const double height = kTop + static_cast<double>(panels) * (kPanel + kGap);
  o << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" << kWidth
    << "\" height=\"" << coord(height) << "\" viewBox=\"0 0 " << kWidth << ' ' << coord(height)
    << "\" font-family=\"sans-serif\" font-size=\"11\">\n<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  o << "<text x=\"" << kLeft << "\" y=\"22\" font-size=\"14\" font-weight=\"bold\">" << xmlText(d.title) << "</text>\n";
  for (std::size_t s = 0; s < d.series.size(); ++s) {
    const double lx = kLeft + 150.0 * static_cast<double>(s);
    o << "<rect x=\"" << coord(lx) << "\" y=\"34\" width=\"12\" height=\"12\" fill=\"" << kColors[s % 5]
      << "\"/><text x=\"" << coord(lx + 16) << "\" y=\"44\">" << xmlText(d.series[s].solver) << "</text>\n";
  }
  Axis x;
  x.lo = INFINITY;
  x.hi = -INFINITY;
  for (const PlotSeries& s : d.series)
    for (const PlotPoint& p : s.points) {
      x.lo = std::min(x.lo, static_cast<double>(p.sample));
      x.hi = std::max(x.hi, static_cast<double>(p.sample));
    }
  if (!std::isfinite(x.lo)) {
    x.lo = 0;
    x.hi = 1;
  }
  if (!(x.hi > x.lo)) x.hi = x.lo + 1;
  x.pixLo = kLeft;
  x.pixHi = kWidth - kRight;
  o << "<text x=\"" << coord(kWidth - kRight) << "\" y=\"" << coord(height - 8)
    << "\" text-anchor=\"end\">rows used (x axis of every panel)</text>\n";
  for (std::size_t p = 0; p < panels; ++p) {
    Axis y;
    y.pixHi = kTop + static_cast<double>(p) * (kPanel + kGap) + 20;
    y.pixLo = y.pixHi + kPanel;
    const int id = static_cast<int>(p);
    if (p + 1 < panels)
      termPanel(o, d, p, x, y, id);
    else
      errorPanel(o, d, x, y, id);
  }
  o << "</svg>\n";
}

}  // namespace rowfold_compare
