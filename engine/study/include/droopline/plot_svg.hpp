#pragma once
/// Line plots as plain SVG text, drawn with the sweep plot's frame, ticks and styling.
#include <string>
#include <vector>

namespace droopline::study {

/// One line of a plot: its name in the legend, colour (`#rrggbb`), points, and dashed or solid.
struct PlotLine {
  std::string name;
  std::string colour = "#1d5f8a";
  std::vector<double> x, y;
  bool dashed = false;
};

/// Lines against a shared pair of axes, with a legend; long lines are thinned to at most
/// `max_points` points each (every k-th, the last kept). Empty when no line has a point.
std::string line_plot_svg(const std::string& title, const std::string& xlabel, const std::string& ylabel,
                          const std::vector<PlotLine>& lines, std::size_t max_points = 3000);

}  // namespace droopline::study
