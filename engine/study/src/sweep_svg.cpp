// The sweep plot, drawn as plain SVG text: a line of the metric against one varied field, or a
// heat map over two. Self-contained (no fonts or scripts fetched), readable in any browser.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <string>

#include "droopline/format.hpp"
#include "droopline/plot_svg.hpp"
#include "droopline/sweep.hpp"
#include "svg_parts.hpp"

namespace droopline::study {
namespace {

using svg::esc;
using svg::num;
using svg::ticks;

// A sequential ramp from deep teal (low) through pale sand to brick red (high).
std::string ramp(double f) {
  f = std::clamp(f, 0.0, 1.0);
  const double stops[3][3] = {{22, 96, 110}, {238, 226, 196}, {170, 58, 40}};
  const double u = f < 0.5 ? f * 2 : (f - 0.5) * 2;
  const auto& a = stops[f < 0.5 ? 0 : 1];
  const auto& b = stops[f < 0.5 ? 1 : 2];
  char buf[16];
  std::snprintf(buf, sizeof buf, "#%02x%02x%02x", static_cast<int>(a[0] + (b[0] - a[0]) * u),
                static_cast<int>(a[1] + (b[1] - a[1]) * u), static_cast<int>(a[2] + (b[2] - a[2]) * u));
  return buf;
}

constexpr double W = 720, H = 460, L = 90, R = 30, T = 50, B = 70;

std::string frame(const std::string& title, const std::string& xlabel, const std::string& ylabel,
                  double extra_right = 0, double extra_below = 0) {
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + num(W + extra_right) + "\" height=\"" +
                  num(H + extra_below) + "\" viewBox=\"0 0 " + num(W + extra_right) + " " + num(H + extra_below) +
                  "\" font-family=\"sans-serif\" font-size=\"12\">\n"
                  "<rect width=\"100%\" height=\"100%\" fill=\"#ffffff\"/>\n";
  s += "<text x=\"" + num(L) + "\" y=\"28\" font-size=\"15\" font-weight=\"bold\">" + esc(title) + "</text>\n";
  s += "<text x=\"" + num(L + (W - L - R) / 2) + "\" y=\"" + num(H - 22) + "\" text-anchor=\"middle\">" + esc(xlabel) +
       "</text>\n";
  s += "<text transform=\"translate(22," + num(T + (H - T - B) / 2) + ") rotate(-90)\" text-anchor=\"middle\">" +
       esc(ylabel) + "</text>\n";
  return s;
}

// A value range widened by 6 % each side (and opened up when it is a single value).
std::pair<double, double> padded(double y0, double y1) {
  if (y1 == y0) {
    y0 -= 0.5 * std::max(1e-3, std::abs(y0) * 1e-3);
    y1 += 0.5 * std::max(1e-3, std::abs(y1) * 1e-3);
  }
  const double pad = (y1 - y0) * 0.06;
  return {y0 - pad, y1 + pad};
}

// The plot area's border, horizontal grid lines and the tick labels of both axes.
std::string axes(double x0, double x1, double y0, double y1) {
  const double pw = W - L - R, ph = H - T - B;
  auto X = [&](double x) { return L + (x - x0) / (x1 - x0) * pw; };
  auto Y = [&](double y) { return T + (1 - (y - y0) / (y1 - y0)) * ph; };
  std::string s = "<rect x=\"" + num(L) + "\" y=\"" + num(T) + "\" width=\"" + num(pw) + "\" height=\"" + num(ph) +
                  "\" fill=\"none\" stroke=\"#888\"/>\n";
  for (double t : ticks(y0, y1)) {
    s += "<line x1=\"" + num(L) + "\" x2=\"" + num(L + pw) + "\" y1=\"" + num(Y(t)) + "\" y2=\"" + num(Y(t)) +
         "\" stroke=\"#e4e4e4\"/><text x=\"" + num(L - 6) + "\" y=\"" + num(Y(t) + 4) + "\" text-anchor=\"end\">" +
         fmt_num(t) + "</text>\n";
  }
  for (double t : ticks(x0, x1))
    s += "<text x=\"" + num(X(t)) + "\" y=\"" + num(T + ph + 18) + "\" text-anchor=\"middle\">" + fmt_num(t) +
         "</text>\n";
  return s;
}

}  // namespace

std::string line_plot_svg(const std::string& title, const std::string& xlabel, const std::string& ylabel,
                          const std::vector<PlotLine>& lines, std::size_t max_points) {
  double x0 = INFINITY, x1 = -INFINITY, lo = INFINITY, hi = -INFINITY;
  for (const PlotLine& l : lines)
    for (std::size_t i = 0; i < std::min(l.x.size(), l.y.size()); ++i) {
      if (!std::isfinite(l.x[i]) || !std::isfinite(l.y[i])) continue;
      x0 = std::min(x0, l.x[i]);
      x1 = std::max(x1, l.x[i]);
      lo = std::min(lo, l.y[i]);
      hi = std::max(hi, l.y[i]);
    }
  if (!std::isfinite(x0)) return {};
  if (x1 == x0) x1 = x0 + 1;
  const auto yr = padded(lo, hi);
  const double y0 = yr.first, y1 = yr.second;
  const double pw = W - L - R, ph = H - T - B;
  auto X = [&](double x) { return L + (x - x0) / (x1 - x0) * pw; };
  auto Y = [&](double y) { return T + (1 - (y - y0) / (y1 - y0)) * ph; };
  // The legend below the axis label, entries side by side and wrapped, each as wide as its name
  // (12 px sans-serif: about 7 px a character), so it never covers a line or leaves the frame.
  std::string key;
  double key_x = L, key_y = H - 2;
  for (const PlotLine& l : lines) {
    if (std::min(l.x.size(), l.y.size()) == 0) continue;
    const double w = 30 + 7.0 * static_cast<double>(l.name.size()) + 18;
    if (key_x > L && key_x + w > W - R) {
      key_x = L;
      key_y += 16;
    }
    key += "<line x1=\"" + num(key_x) + "\" x2=\"" + num(key_x + 24) + "\" y1=\"" + num(key_y - 4) + "\" y2=\"" +
           num(key_y - 4) + "\" stroke=\"" + esc(l.colour) + "\" stroke-width=\"2\"" +
           (l.dashed ? " stroke-dasharray=\"6 4\"" : "") + "/><text x=\"" + num(key_x + 30) + "\" y=\"" + num(key_y) +
           "\">" + esc(l.name) + "</text>\n";
    key_x += w;
  }
  std::string s = frame(title, xlabel, ylabel, 0, key_y - H + 8) + axes(x0, x1, y0, y1);
  for (const PlotLine& l : lines) {
    const std::size_t n = std::min(l.x.size(), l.y.size());
    if (n == 0) continue;
    const std::size_t every = std::max<std::size_t>(1, (n + max_points - 1) / std::max<std::size_t>(1, max_points));
    s += "<polyline fill=\"none\" stroke=\"" + esc(l.colour) + "\" stroke-width=\"1.5\"" +
         (l.dashed ? " stroke-dasharray=\"6 4\"" : "") + " points=\"";
    for (std::size_t i = 0; i < n; i += every)
      if (std::isfinite(l.x[i]) && std::isfinite(l.y[i])) s += num(X(l.x[i])) + "," + num(Y(l.y[i])) + " ";
    if ((n - 1) % every != 0 && std::isfinite(l.x[n - 1]) && std::isfinite(l.y[n - 1]))
      s += num(X(l.x[n - 1])) + "," + num(Y(l.y[n - 1]));
    s += "\"><title>" + esc(l.name) + "</title></polyline>\n";
  }
  return s + key + "</svg>\n";
}

std::string sweep_svg(const std::vector<std::string>& paths, const std::vector<std::vector<double>>& axis_values,
                      const std::vector<SweepRow>& rows, const std::string& metric, const std::string& title) {
  const auto& names = metric_names();
  const auto it = std::find(names.begin(), names.end(), metric);
  if (it == names.end() || paths.empty() || paths.size() > 2 || axis_values.size() != paths.size()) return {};
  const std::size_t mi = static_cast<std::size_t>(it - names.begin());
  auto value_of = [&](const SweepRow& r) -> std::optional<double> {
    if (r.status != "ok" || mi >= r.metrics.size()) return std::nullopt;
    return r.metrics[mi];
  };
  double lo = INFINITY, hi = -INFINITY;
  for (const SweepRow& r : rows)
    if (auto v = value_of(r)) {
      lo = std::min(lo, *v);
      hi = std::max(hi, *v);
    }
  if (!std::isfinite(lo)) return {};
  const double pw = W - L - R, ph = H - T - B;

  if (paths.size() == 1) {
    std::vector<std::pair<double, double>> pts;
    for (const SweepRow& r : rows)
      if (auto v = value_of(r)) pts.emplace_back(r.values[0], *v);
    std::sort(pts.begin(), pts.end());
    double x0 = pts.front().first, x1 = pts.back().first;
    if (x1 == x0) x1 = x0 + 1;
    const auto yr = padded(lo, hi);
    const double y0 = yr.first, y1 = yr.second;
    auto X = [&](double x) { return L + (x - x0) / (x1 - x0) * pw; };
    auto Y = [&](double y) { return T + (1 - (y - y0) / (y1 - y0)) * ph; };
    std::string s = frame(title, paths[0], metric) + axes(x0, x1, y0, y1);
    s += "<polyline fill=\"none\" stroke=\"#1d5f8a\" stroke-width=\"2\" points=\"";
    for (auto [x, y] : pts) s += num(X(x)) + "," + num(Y(y)) + " ";
    s += "\"/>\n";
    for (auto [x, y] : pts)
      s += "<circle cx=\"" + num(X(x)) + "\" cy=\"" + num(Y(y)) + "\" r=\"3\" fill=\"#1d5f8a\"><title>" +
           esc(paths[0]) + " = " + fmt_num(x) + ": " + metric + " = " + fmt_num(y) + "</title></circle>\n";
    return s + "</svg>\n";
  }

  // Two fields: a heat map, the first field across, the second up; cells not run stay grey.
  const auto& xs = axis_values[0];
  const auto& ys = axis_values[1];
  std::map<std::pair<std::size_t, std::size_t>, double> cell;
  for (const SweepRow& r : rows) {
    auto v = value_of(r);
    if (!v) continue;
    const auto xi = static_cast<std::size_t>(std::find(xs.begin(), xs.end(), r.values[0]) - xs.begin());
    const auto yi = static_cast<std::size_t>(std::find(ys.begin(), ys.end(), r.values[1]) - ys.begin());
    cell[{xi, yi}] = *v;
  }
  const double cw = pw / static_cast<double>(xs.size()), ch = ph / static_cast<double>(ys.size());
  std::string s = frame(title, paths[0], paths[1], 90);
  const bool label = xs.size() * ys.size() <= 144;
  for (std::size_t xi = 0; xi < xs.size(); ++xi)
    for (std::size_t yi = 0; yi < ys.size(); ++yi) {
      const double x = L + static_cast<double>(xi) * cw, y = T + ph - static_cast<double>(yi + 1) * ch;
      const auto c = cell.find({xi, yi});
      const double f = c == cell.end() || hi == lo ? 0.5 : (c->second - lo) / (hi - lo);
      s += "<rect x=\"" + num(x) + "\" y=\"" + num(y) + "\" width=\"" + num(cw + 0.5) + "\" height=\"" + num(ch + 0.5) +
           "\" fill=\"" + (c == cell.end() ? std::string("#cccccc") : ramp(f)) + "\">";
      s += "<title>" + esc(paths[0]) + " = " + fmt_num(xs[xi]) + ", " + esc(paths[1]) + " = " + fmt_num(ys[yi]) + ": " +
           (c == cell.end() ? std::string("not run") : metric + " = " + fmt_num(c->second)) + "</title></rect>\n";
      if (label && c != cell.end())
        s += "<text x=\"" + num(x + cw / 2) + "\" y=\"" + num(y + ch / 2 + 4) +
             "\" text-anchor=\"middle\" font-size=\"10\" fill=\"" + (f < 0.25 || f > 0.8 ? "#ffffff" : "#222222") +
             "\">" + fmt_num(c->second) + "</text>\n";
    }
  const std::size_t xstep = std::max<std::size_t>(1, xs.size() / 10), ystep = std::max<std::size_t>(1, ys.size() / 10);
  for (std::size_t xi = 0; xi < xs.size(); xi += xstep)
    s += "<text x=\"" + num(L + (static_cast<double>(xi) + 0.5) * cw) + "\" y=\"" + num(T + ph + 18) +
         "\" text-anchor=\"middle\">" + fmt_num(xs[xi]) + "</text>\n";
  for (std::size_t yi = 0; yi < ys.size(); yi += ystep)
    s += "<text x=\"" + num(L - 6) + "\" y=\"" + num(T + ph - (static_cast<double>(yi) + 0.5) * ch + 4) +
         "\" text-anchor=\"end\">" + fmt_num(ys[yi]) + "</text>\n";
  // Colour key.
  const double kx = W + 10;
  for (int i = 0; i < 50; ++i)
    s += "<rect x=\"" + num(kx) + "\" y=\"" + num(T + ph - (i + 1) * ph / 50) + "\" width=\"16\" height=\"" +
         num(ph / 50 + 0.5) + "\" fill=\"" + ramp(i / 49.0) + "\"/>\n";
  s += "<text x=\"" + num(kx + 20) + "\" y=\"" + num(T + 10) + "\">" + fmt_num(hi) + "</text>\n";
  s += "<text x=\"" + num(kx + 20) + "\" y=\"" + num(T + ph) + "\">" + fmt_num(lo) + "</text>\n";
  s += "<text x=\"" + num(kx) + "\" y=\"" + num(T - 8) + "\">" + esc(metric) + "</text>\n";
  return s + "</svg>\n";
}

}  // namespace droopline::study
