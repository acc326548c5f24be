#pragma once
// Pieces of the plain-SVG charts the study target draws (the sweep plot, the debrief's charts):
// escaping, coordinates and round tick values. Private to the target.
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

namespace droopline::study::svg {

/// `s` safe inside XML/HTML text and attribute values.
inline std::string esc(const std::string& s) {
  std::string o;
  o.reserve(s.size());
  for (char c : s) {
    if (c == '<')
      o += "&lt;";
    else if (c == '>')
      o += "&gt;";
    else if (c == '&')
      o += "&amp;";
    else if (c == '"')
      o += "&quot;";
    else if (c == '\'')
      o += "&#39;";
    else
      o += c;
  }
  return o;
}

/// A coordinate to one decimal.
inline std::string num(double v) {
  char b[32];
  std::snprintf(b, sizeof b, "%.1f", v);
  return b;
}

/// About five round tick values covering [lo, hi].
inline std::vector<double> ticks(double lo, double hi) {
  if (!(hi > lo)) return {lo};
  const double raw = (hi - lo) / 5.0;
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  const double r = raw / mag;
  const double step = (r < 1.5 ? 1 : r < 3.5 ? 2 : r < 7.5 ? 5 : 10) * mag;
  std::vector<double> out;
  for (double t = std::ceil(lo / step) * step; t <= hi + step * 1e-9; t += step)
    out.push_back(std::abs(t) < step * 1e-9 ? 0.0 : t);
  return out;
}

}  // namespace droopline::study::svg
