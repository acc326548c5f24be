// The debrief as one self-contained HTML page: inline CSS and SVG, no script, nothing fetched
// (no fonts, images or links), laid out to print on A4. Every text from the journal is escaped.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "debrief_data.hpp"
#include "droopline/format.hpp"
#include "svg_parts.hpp"

namespace droopline::study {
namespace {

using svg::esc;
using svg::num;

constexpr double W = 1000, H = 340, L = 72, R = 16, T = 58, B = 44;
// Line colours with a dash pattern each, so lines differ in print and without colour too.
constexpr const char* kColours[] = {"#1d5f8a", "#b5452b", "#2f7d3a", "#7a4a9c", "#a27300", "#3c3c3c"};
constexpr const char* kDashes[] = {"", "7 3", "2 3", "9 3 2 3", "4 4", "1 2"};

std::string css() {
  return R"(body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;color:#1c1c1c;background:#fff;margin:0 auto;
max-width:1120px;padding:18px 22px;line-height:1.4}
h1{font-size:1.6em;margin:0 0 4px}h2{font-size:1.25em;border-bottom:2px solid #d8dde3;padding-bottom:3px;margin:26px 0 10px}
h3{font-size:1.05em;margin:16px 0 6px}
.caveat{border-left:4px solid #c98a00;background:#fff8e6;padding:4px 10px;margin:6px 0 12px}
.meta{color:#444}.meta span{margin-right:18px;display:inline-block}
.status-complete{color:#2f6b36;font-weight:600}.status-incomplete{color:#9c3b1f;font-weight:600}
.caution{border-left:4px solid #a27300;background:#fbf6e9;padding:6px 10px;margin:12px 0}
.briefing{white-space:pre-wrap;background:#f5f7f9;padding:8px 12px;border-radius:4px}
table{border-collapse:collapse;width:100%;margin:6px 0 10px;font-size:.92em}
th,td{border:1px solid #d8dde3;padding:4px 7px;text-align:left;vertical-align:top;overflow-wrap:anywhere}
th{background:#eef1f4;overflow-wrap:normal;white-space:nowrap}td.num{text-align:right;white-space:nowrap;font-variant-numeric:tabular-nums}
.arith{font-family:ui-monospace,"DejaVu Sans Mono",monospace;font-size:.9em}
figure{margin:10px 0 18px}figure>svg{width:100%;height:auto;display:block;border:1px solid #e2e6ea}
figcaption{font-size:.88em;color:#333;margin-top:4px}
.key{display:inline-block;margin-right:16px;white-space:nowrap}.key svg{vertical-align:middle;margin-right:4px}
.met-yes{color:#2f6b36}.met-no{color:#9c3b1f;font-weight:600}
.note{white-space:pre-wrap}td.who{min-width:6.5em;overflow-wrap:break-word}
section,tr,figure{break-inside:avoid;page-break-inside:avoid}
@media print{@page{size:A4;margin:14mm}body{max-width:none;padding:0;font-size:10pt}
h2{break-after:avoid;page-break-after:avoid}figure>svg{border:none}a{color:inherit;text-decoration:none}}
)";
}

std::string fixed(const std::optional<double>& v, int decimals, const std::string& unit = "") {
  return v ? fmt_fixed(*v, decimals) + unit : std::string("–");
}

std::string time_text(double t_s) { return fmt_fixed(t_s, 1) + " s"; }

struct Series {
  std::string label;
  const std::vector<double>* y;
};
struct Band {
  double lo, hi;
  const char* fill;
};
struct Mark {
  double t_s;
  std::string label;
  enum Shape { action, script, alarm } shape;
  std::string title;
};

// One time chart: lines over t, shaded bands, and the timeline's marks (an action: a solid line
// under a numbered circle; a script event: a dashed line under a triangle labelled S1, S2...; an
// alarm: a diamond labelled A1, A2... on the lower edge).
std::string chart(const std::string& title, const std::string& ylabel, const std::vector<double>& t,
                  const std::vector<Series>& lines, const std::vector<Band>& bands, const std::vector<Mark>& marks,
                  std::optional<std::pair<double, double>> keep_in_view = std::nullopt) {
  const double pw = W - L - R, ph = H - T - B;
  double x0 = t.empty() ? 0 : t.front(), x1 = t.empty() ? 1 : t.back();
  if (!(x1 > x0)) x1 = x0 + 1;
  double y0 = INFINITY, y1 = -INFINITY;
  for (const Series& s : lines)
    for (double v : *s.y) {
      y0 = std::min(y0, v);
      y1 = std::max(y1, v);
    }
  if (keep_in_view) {
    y0 = std::min(y0, keep_in_view->first);
    y1 = std::max(y1, keep_in_view->second);
  }
  if (!std::isfinite(y0)) y0 = 0, y1 = 1;
  if (y1 - y0 < 1e-6) y0 -= 0.5, y1 += 0.5;
  const double pad = (y1 - y0) * 0.06;
  y0 -= pad;
  y1 += pad;
  auto X = [&](double x) { return L + (x - x0) / (x1 - x0) * pw; };
  auto Y = [&](double y) { return T + (1 - (y - y0) / (y1 - y0)) * ph; };
  std::string s = "<svg viewBox=\"0 0 " + num(W) + " " + num(H) + "\" role=\"img\" aria-label=\"" + esc(title) +
                  "\" font-family=\"sans-serif\" font-size=\"12\">\n<rect width=\"" + num(W) + "\" height=\"" + num(H) +
                  "\" fill=\"#ffffff\"/>\n";
  for (const Band& b : bands) {
    const double top = Y(std::min(b.hi, y1)), bottom = Y(std::max(b.lo, y0));
    if (bottom > top)
      s += "<rect x=\"" + num(L) + "\" y=\"" + num(top) + "\" width=\"" + num(pw) + "\" height=\"" + num(bottom - top) +
           "\" fill=\"" + b.fill + "\"/>\n";
  }
  for (double v : svg::ticks(y0, y1))
    s += "<line x1=\"" + num(L) + "\" x2=\"" + num(L + pw) + "\" y1=\"" + num(Y(v)) + "\" y2=\"" + num(Y(v)) +
         "\" stroke=\"#e2e2e2\"/><text x=\"" + num(L - 6) + "\" y=\"" + num(Y(v) + 4) + "\" text-anchor=\"end\">" +
         fmt_num(v) + "</text>\n";
  for (double v : svg::ticks(x0, x1))
    s += "<text x=\"" + num(X(v)) + "\" y=\"" + num(T + ph + 17) + "\" text-anchor=\"middle\">" + fmt_num(v) +
         "</text>\n";
  s += "<text x=\"" + num(L + pw / 2) + "\" y=\"" + num(H - 6) + "\" text-anchor=\"middle\">time (s)</text>\n";
  s += "<text transform=\"translate(16," + num(T + ph / 2) + ") rotate(-90)\" text-anchor=\"middle\">" + esc(ylabel) +
       "</text>\n";
  s += "<rect x=\"" + num(L) + "\" y=\"" + num(T) + "\" width=\"" + num(pw) + "\" height=\"" + num(ph) +
       "\" fill=\"none\" stroke=\"#888\"/>\n";
  for (std::size_t i = 0; i < lines.size(); ++i) {
    s += "<polyline fill=\"none\" stroke=\"" + std::string(kColours[i % 6]) + "\" stroke-width=\"1.6\"";
    if (*kDashes[i % 6]) s += " stroke-dasharray=\"" + std::string(kDashes[i % 6]) + "\"";
    s += " points=\"";
    for (std::size_t k = 0; k < t.size() && k < lines[i].y->size(); ++k)
      s += num(X(t[k])) + "," + num(Y((*lines[i].y)[k])) + " ";
    s += "\"><title>" + esc(lines[i].label) + "</title></polyline>\n";
  }
  // Each label takes the first of a few rows where it clears the last label (else it is left out:
  // the mark keeps its tooltip and the timeline lists it), so no two labels overlap.
  constexpr double kLabelW = 26;
  std::vector<double> top_rows(3, -1e9), bottom_rows(3, -1e9);
  auto row_for = [](std::vector<double>& rows, double x) -> int {
    for (std::size_t r = 0; r < rows.size(); ++r)
      if (x - rows[r] >= kLabelW) {
        rows[r] = x;
        return static_cast<int>(r);
      }
    return -1;
  };
  for (const Mark& m : marks) {
    const double x = X(std::clamp(m.t_s, x0, x1));
    const std::string tip = "<title>" + esc(m.label + " at " + time_text(m.t_s) + ": " + m.title) + "</title>";
    if (m.shape == Mark::alarm) {
      // Diamonds on the lower edge; labels stacked above them (a white halo keeps them readable
      // over a line).
      const double y = T + ph - 8;
      const int r = row_for(bottom_rows, x);
      s += "<g>" + tip + "<path d=\"M" + num(x) + " " + num(y - 5) + " l5 5 l-5 5 l-5 -5 z\" fill=\"#a27300\"/>";
      if (r >= 0)
        s += "<text x=\"" + num(x) + "\" y=\"" + num(y - 9 - 12.0 * r) +
             "\" font-size=\"10\" text-anchor=\"middle\" fill=\"#6b4c00\" stroke=\"#fff\" stroke-width=\"3\" "
             "paint-order=\"stroke\">" +
             esc(m.label) + "</text>";
      s += "</g>\n";
      continue;
    }
    const int r = row_for(top_rows, x);
    const double ly = T - 36 + 14.0 * std::max(r, 0);
    const bool script = m.shape == Mark::script;
    s += "<g>" + tip + "<line x1=\"" + num(x) + "\" x2=\"" + num(x) + "\" y1=\"" + num(ly + 6) + "\" y2=\"" +
         num(T + ph) + "\" stroke=\"" + (script ? "#7a4a9c" : "#333") + "\" stroke-width=\"1\"" +
         (script ? " stroke-dasharray=\"5 3\"" : "") + "/>";
    // A script label sits right of its triangle, or left of it near the right edge.
    const bool left = x + 8 + 7.0 * static_cast<double>(m.label.size()) > W - 2;
    if (script)
      s += "<path d=\"M" + num(x - 6) + " " + num(ly - 5) + " h12 l-6 10 z\" fill=\"#7a4a9c\"/>" +
           (r < 0 ? std::string()
                  : "<text x=\"" + num(left ? x - 8 : x + 8) + "\" y=\"" + num(ly + 4) + "\" font-size=\"10\"" +
                        (left ? " text-anchor=\"end\"" : "") + " fill=\"#4b2a63\">" + esc(m.label) + "</text>");
    else if (r < 0)  // no room for its number: a small dot, not an empty circle that looks numbered
      s += "<circle cx=\"" + num(x) + "\" cy=\"" + num(ly + 6) + "\" r=\"3\" fill=\"#333\"/>";
    else
      s += "<circle cx=\"" + num(x) + "\" cy=\"" + num(ly) + "\" r=\"6.5\" fill=\"#fff\" stroke=\"#333\"/>" +
           "<text x=\"" + num(x) + "\" y=\"" + num(ly + 3.5) + "\" font-size=\"9\" text-anchor=\"middle\">" +
           esc(m.label) + "</text>";
    s += "</g>\n";
  }
  return s + "</svg>\n";
}

// The key below a chart: each line's stroke and dash, and the mark shapes.
std::string legend(const std::vector<Series>& lines, const std::string& extra) {
  std::string s = "<figcaption>";
  for (std::size_t i = 0; i < lines.size(); ++i) {
    s += "<span class=\"key\"><svg width=\"28\" height=\"8\" viewBox=\"0 0 28 8\"><line x1=\"0\" x2=\"28\" y1=\"4\" "
         "y2=\"4\" stroke=\"" +
         std::string(kColours[i % 6]) + "\" stroke-width=\"2\"";
    if (*kDashes[i % 6]) s += " stroke-dasharray=\"" + std::string(kDashes[i % 6]) + "\"";
    s += "/></svg>" + esc(lines[i].label) + "</span>";
  }
  return s + extra + "</figcaption>";
}

std::vector<Mark> marks_of(const Debrief& d) {
  std::vector<Mark> out;
  for (const DebriefEvent& e : d.timeline) {
    if (e.kind == "action") out.push_back({e.t_s, e.marker, Mark::action, e.by + ": " + e.what});
    if (e.kind == "script") out.push_back({e.t_s, e.marker, Mark::script, e.what});
    if (e.kind == "alarm raised") out.push_back({e.t_s, e.marker, Mark::alarm, e.what});
  }
  return out;
}

std::string charts(const Debrief& d) {
  const DebriefSeries& s = d.series;
  const std::vector<Mark> marks = marks_of(d);
  const std::string marks_key =
      "<br><span class=\"key\">(1) an action, numbered as in the timeline (&#9679; one too close to others to "
      "number: its number when pointed at)</span><span class=\"key\">&#9660; S1 a "
      "script "
      "event (dashed)</span><span class=\"key\">&#9670; A1 an alarm raised</span>";
  auto lines_of = [](const std::vector<std::string>& names, const std::vector<std::vector<double>>& ys) {
    std::vector<Series> out;
    for (std::size_t i = 0; i < names.size(); ++i) out.push_back({names[i], &ys[i]});
    return out;
  };
  std::string h = "<section id=\"charts\"><h2>Frequency, ACE and tie flows</h2>\n";
  const auto f_lines = lines_of(s.areas, s.f_hz);
  const double std_band = d.limits.standard_band_hz, lim_band = d.limits.limit_band_hz;
  h += "<figure><h3>Frequency</h3>" +
       chart("Frequency", "frequency (Hz)", s.t_s, f_lines,
             {{d.f0_hz - lim_band, d.f0_hz + lim_band, "#fbefd9"}, {d.f0_hz - std_band, d.f0_hz + std_band, "#e3f1e1"}},
             marks, std::pair{d.f0_hz - std_band, d.f0_hz + std_band}) +
       legend(f_lines, "<br><span class=\"key\">green band: within &#177;" + fmt_num(std_band) +
                           " Hz (standard)</span><span class=\"key\">sand band: within &#177;" + fmt_num(lim_band) +
                           " Hz (limit)</span>" + marks_key) +
       "</figure>\n";
  const auto ace_lines = lines_of(s.areas, s.ace_mw);
  h += "<figure><h3>Area control error</h3>" + chart("ACE", "ACE (MW)", s.t_s, ace_lines, {}, marks) +
       legend(ace_lines, marks_key) + "</figure>\n";
  if (!s.ties.empty()) {
    const auto tie_lines = lines_of(s.ties, s.flow_mw);
    h += "<figure><h3>Tie flows</h3>" + chart("Tie flows", "flow, from -> to (MW)", s.t_s, tie_lines, {}, marks) +
         legend(tie_lines, marks_key) + "</figure>\n";
  }
  return h + "</section>\n";
}

std::string objectives(const Debrief& d) {
  std::string h = "<section id=\"objectives\"><h2>Objectives and scores</h2>\n";
  if (d.scores.empty()) return h + "<p>This run has no objectives to score.</p></section>\n";
  for (const SeatScore& seat : d.scores) {
    std::string trainee;
    for (const DebriefSeat& s : d.seats)
      if (s.id == seat.seat && !s.trainee.empty()) trainee = " (" + s.trainee + ")";
    h += "<h3>Seat " + esc(seat.seat + trainee) + ": " + fmt_fixed(seat.score, 1) + " of 100</h3>\n";
    h += "<table class=\"objectives\"><thead><tr><th>objective</th><th>measured</th><th>target</th><th>score</th>"
         "<th>margin</th><th>met</th><th>arithmetic</th></tr></thead><tbody>\n";
    for (const ObjectiveResult& r : seat.objectives)
      h += "<tr><td>" + esc(r.label) + "</td><td class=\"num\">" + fixed(r.measured, 2, " " + r.unit) +
           "</td><td class=\"num\">" + fmt_num(r.target) + " " + esc(r.unit) + "</td><td class=\"num\">" +
           fmt_fixed(r.score, 1) + "</td><td class=\"num\">" + fmt_fixed(r.margin, 2) + " " + esc(r.unit) +
           "</td><td class=\"" + (r.met ? "met-yes\">yes" : "met-no\">no") + "</td><td class=\"arith\">" +
           esc(r.arithmetic) + "</td></tr>\n";
    h += "</tbody></table>\n<p>Overall: <span class=\"arith\">" + esc(seat.arithmetic) + "</span></p>\n";
  }
  return h + "</section>\n";
}

std::string timeline(const Debrief& d) {
  std::string h =
      "<section id=\"timeline\"><h2>Timeline</h2>\n<table class=\"timeline\"><thead><tr><th>mark</th>"
      "<th>time</th><th>kind</th><th>by</th><th>what</th><th>response</th></tr></thead><tbody>\n";
  for (const DebriefEvent& e : d.timeline) {
    std::string response;
    if (e.kind == "alarm raised") {
      response = e.to_action_s ? "first action by " + e.action_by + " after " + fmt_fixed(*e.to_action_s, 1) + " s"
                               : "no action by a seat it concerns";
      response += "; ";
      response += e.to_ack_s ? "acknowledged by " + e.ack_by + " after " + fmt_fixed(*e.to_ack_s, 1) + " s"
                             : "not acknowledged";
    }
    h += "<tr><td>" + esc(e.marker) + "</td><td class=\"num\">" + time_text(e.t_s) + "</td><td>" + esc(e.kind) +
         "</td><td class=\"who\">" + esc(e.by) + "</td><td>" + esc(e.what) + "</td><td>" + esc(response) +
         "</td></tr>\n";
  }
  if (d.timeline.empty()) h += "<tr><td colspan=\"6\">nothing happened</td></tr>\n";
  return h + "</tbody></table></section>\n";
}

std::string disturbances(const Debrief& d) {
  std::string h = "<section id=\"disturbances\"><h2>Disturbances beside the droop prediction</h2>\n";
  if (d.disturbances.empty()) return h + "<p>No disturbance in this run.</p></section>\n";
  int n = 0;
  for (const DebriefDisturbance& x : d.disturbances) {
    h += "<h3>" + std::to_string(++n) + ". At " + time_text(x.at_s) + ": " + esc(x.cause) + "</h3>\n";
    h += "<table class=\"metrics\"><thead><tr><th>quantity</th><th>measured</th><th>droop prediction</th></tr></thead>"
         "<tbody>\n";
    h += "<tr><td>imbalance (positive: deficit)</td><td class=\"num\">" + fmt_fixed(x.delta_mw, 1) +
         " MW</td><td></td></tr>\n";
    h += "<tr><td>settling frequency</td><td class=\"num\">" + fixed(x.settling_hz, 3, " Hz") +
         "</td><td class=\"num\">" + fmt_fixed(x.predicted_settling_hz, 3) + " Hz</td></tr>\n";
    h += "<tr><td>settling deviation</td><td class=\"num\">" +
         fixed(x.settling_hz ? std::optional(*x.settling_hz - x.pre_hz) : std::nullopt, 3, " Hz") +
         "</td><td class=\"num\">" + fmt_fixed(x.predicted_settling_hz - x.pre_hz, 3) + " Hz</td></tr>\n";
    h += std::string("<tr><td>") + (x.zenith ? "zenith" : "nadir") + "</td><td class=\"num\">" +
         fixed(x.nadir_hz, 3, " Hz") +
         (x.nadir_at_s ? " at +" + fmt_fixed(*x.nadir_at_s - x.at_s, 2) + " s" : std::string()) +
         "</td><td></td></tr>\n";
    h += "<tr><td>RoCoF (first 0.5 s)</td><td class=\"num\">" + fixed(x.rocof_hz_per_s, 3, " Hz/s") +
         "</td><td></td></tr>\n";
    h += "<tr><td>response</td><td class=\"num\">" + fixed(x.response_mw_per_0p1hz, 1, " MW/0.1 Hz") +
         "</td><td></td></tr>\n</tbody></table>\n";
    if (x.secondary_in_window)
      h += "<p class=\"caveat\">Secondary control was on in this island during the settling window (20 to 52 s "
           "after): the settling frequency and the response show its action as well as the governors', so they "
           "are not a measure of the droop response.</p>\n";
    if (x.units.empty()) continue;
    // The largest droop shares first; a large fleet shows its first twelve.
    std::vector<DebriefUnit> units = x.units;
    std::stable_sort(units.begin(), units.end(), [](const DebriefUnit& a, const DebriefUnit& b) {
      return std::abs(a.predicted_mw) > std::abs(b.predicted_mw);
    });
    h += "<table class=\"units\"><thead><tr><th>unit</th><th>response after 10 s</th><th>after 30 s</th>"
         "<th>droop share predicted</th></tr></thead><tbody>\n";
    for (std::size_t i = 0; i < units.size() && i < 12; ++i)
      h += "<tr><td>" + esc(units[i].id) + "</td><td class=\"num\">" + fixed(units[i].response_10s_mw, 1, " MW") +
           "</td><td class=\"num\">" + fixed(units[i].response_30s_mw, 1, " MW") + "</td><td class=\"num\">" +
           fmt_fixed(units[i].predicted_mw, 1) + " MW</td></tr>\n";
    if (units.size() > 12)
      h += "<tr><td colspan=\"4\">and " + std::to_string(units.size() - 12) + " more units</td></tr>\n";
    h += "</tbody></table>\n";
  }
  return h + "</section>\n";
}

}  // namespace

std::string render_debrief_html(const Debrief& d) {
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>Debrief: " + esc(d.name) +
                  "</title>\n<style>\n" + css() + "</style></head><body>\n";
  h += "<section id=\"title\"><h1>Debrief: " + esc(d.name) + "</h1>\n<p class=\"meta\"><span>run " +
       esc(d.run_id.empty() ? std::string("(no id: an older journal)") : d.run_id) +
       "</span><span>simulated to t = " + fmt_fixed(d.end_s, 1) + " s</span><span class=\"" +
       (d.complete ? "status-complete\">complete" : "status-incomplete\">incomplete") + "</span>" +
       (d.why.empty() ? std::string() : "<span>" + esc(d.why) + "</span>") + "</p>\n";
  h += "<p class=\"caution\">A training record, not a compliance assessment: the figures come from a simulation of "
       "this exercise and say how the session went, nothing about a real system or a person's competence.</p>"
       "</section>\n";
  if (!d.briefing.empty())
    h += "<section id=\"briefing\"><h2>Briefing</h2><div class=\"briefing\">" + esc(d.briefing) + "</div></section>\n";
  if (!d.seats.empty()) {
    h += "<section id=\"seats\"><h2>Seats</h2><table class=\"seats\"><thead><tr><th>seat</th><th>name</th>"
         "<th>areas</th><th>trainee</th></tr></thead><tbody>\n";
    for (const DebriefSeat& s : d.seats) {
      std::string areas;
      for (const std::string& a : s.areas) areas += (areas.empty() ? "" : ", ") + a;
      h += "<tr><td>" + esc(s.id) + "</td><td>" + esc(s.name) + "</td><td>" + esc(areas) + "</td><td>" +
           esc(s.trainee.empty() ? std::string("(not entered)") : s.trainee) + "</td></tr>\n";
    }
    h += "</tbody></table></section>\n";
  }
  if (d.is_exercise) h += objectives(d);
  h += charts(d) + timeline(d) + disturbances(d);
  h += "<section id=\"notes\"><h2>Instructor's notes</h2>\n";
  if (d.notes.empty()) h += "<p>No notes.</p>\n";
  for (const DebriefNote& n : d.notes)
    h += "<p class=\"note\"><strong>" + (n.t_s ? time_text(*n.t_s) + ", " : std::string()) + esc(n.by) + ":</strong> " +
         esc(n.text) + "</p>\n";
  return h + "</section>\n</body></html>\n";
}

}  // namespace droopline::study
