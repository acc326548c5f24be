#include "droopline/recording.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <cmath>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {
namespace detail {

std::string_view trim(std::string_view field) {
  while (!field.empty() && (field.front() == ' ' || field.front() == '\t')) field.remove_prefix(1);
  while (!field.empty() && (field.back() == ' ' || field.back() == '\t' || field.back() == '\r'))
    field.remove_suffix(1);
  return field;
}

bool parse_number(std::string_view field, double& out) {
  field = trim(field);
  if (field.empty()) return false;
  // from_chars refuses a leading plus; one plus is allowed, not "+-1".
  if (field.front() == '+' && field.size() > 1 && field[1] != '-') field.remove_prefix(1);
  double v = 0.0;
  const auto [end, ec] = std::from_chars(field.data(), field.data() + field.size(), v);
  // from_chars reads "nan" and "inf"; a recording holding them is broken, not a value.
  if (ec != std::errc() || end != field.data() + field.size() || !std::isfinite(v)) return false;
  out = v;
  return true;
}

// The lines of `text` without their ends (LF or CRLF), with a byte order mark dropped.
std::vector<std::string_view> lines_of(std::string_view text) {
  if (text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);
  std::vector<std::string_view> lines;
  while (!text.empty()) {
    const auto nl = text.find('\n');
    std::string_view line = text.substr(0, nl);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    lines.push_back(line);
    if (nl == std::string_view::npos) break;
    text.remove_prefix(nl + 1);
  }
  return lines;
}

std::size_t fill_missing(const std::vector<double>& t_s, std::vector<double>& values,
                         const std::vector<char>& missing) {
  std::size_t filled = 0;
  std::optional<std::size_t> before;  // the last present sample
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (!missing[i]) {
      before = i;
      continue;
    }
    std::size_t after = i;
    while (after < values.size() && missing[after]) ++after;
    for (std::size_t k = i; k < after; ++k) {
      if (before && after < values.size()) {
        const double w = (t_s[k] - t_s[*before]) / (t_s[after] - t_s[*before]);
        values[k] = values[*before] + w * (values[after] - values[*before]);
      } else {
        values[k] = before ? values[*before] : values[after];
      }
      ++filled;
    }
    i = after - 1;
  }
  return filled;
}

namespace {

// Linear interpolation of (t, v) at the increasing times `grid`, both within [t.front(), t.back()].
std::vector<double> interpolate(const std::vector<double>& t, const std::vector<double>& v,
                                const std::vector<double>& grid) {
  std::vector<double> out(grid.size());
  std::size_t j = 0;
  for (std::size_t i = 0; i < grid.size(); ++i) {
    while (j + 2 < t.size() && t[j + 1] <= grid[i]) ++j;
    const double w = t.size() < 2 ? 0.0 : std::clamp((grid[i] - t[j]) / (t[j + 1] - t[j]), 0.0, 1.0);
    out[i] = t.size() < 2 ? v[0] : v[j] + w * (v[j + 1] - v[j]);
  }
  return out;
}

std::string lower_extension(const std::string& path) {
  const auto dot = path.rfind('.');
  const auto slash = path.find_last_of("/\\");
  if (dot == std::string::npos || (slash != std::string::npos && dot < slash)) return "";
  std::string ext = path.substr(dot);
  std::transform(ext.begin(), ext.end(), ext.begin(), [](unsigned char c) { return std::tolower(c); });
  return ext;
}

}  // namespace

bool resample(Recording& rec, double hz, const std::string& why, std::vector<Issue>& issues) {
  const double t0 = rec.t_s.front(), span = rec.t_s.back() - t0;
  // 50 million samples (1.2 GB over three series) is far beyond any plant recording worth fitting.
  constexpr double kMaxSamples = 5e7;
  if (span * hz > kMaxSamples) {
    issues.push_back({rec.source,
                      why + " onto " + fmt_num(hz) + " Hz over " + fmt_num(span) + " s would make " +
                          fmt_num(span * hz) + " samples (at most 5e+07)",
                      false});
    return false;
  }
  // The small allowance keeps the last sample when the span is a whole number of steps.
  const auto n = static_cast<std::size_t>(std::floor(span * hz + 1e-9)) + 1;
  std::vector<double> grid(n);
  for (std::size_t i = 0; i < n; ++i) grid[i] = t0 + static_cast<double>(i) / hz;
  rec.frequency_hz = interpolate(rec.t_s, rec.frequency_hz, grid);
  for (auto& [name, series] : rec.power_mw) series = interpolate(rec.t_s, series, grid);
  rec.t_s = std::move(grid);
  rec.warnings.push_back(why + " onto " + fmt_num(hz) + " Hz by linear interpolation");
  return true;
}

bool check_options(const RecordingOptions& options, std::vector<Issue>& issues) {
  const std::size_t before = issues.size();
  if (options.frequency_column.empty()) issues.push_back({"frequency column", "must be named", false});
  for (const std::string& p : options.power_columns)
    if (p.empty()) issues.push_back({"power column", "must not be empty", false});
  if (options.units == RecordingUnits::per_unit && !(options.base_mw > 0.0 && std::isfinite(options.base_mw)))
    issues.push_back(
        {"base_mw", "per-unit values need a power base above 0 MW, not " + fmt_num(options.base_mw), false});
  if (options.units == RecordingUnits::per_unit && !(options.base_hz > 0.0 && std::isfinite(options.base_hz)))
    issues.push_back(
        {"base_hz", "per-unit values need a frequency base above 0 Hz, not " + fmt_num(options.base_hz), false});
  // Above 1 MHz a ten-minute recording would not fit in memory; below 1 mHz nothing is left of it.
  if (options.resample_hz && !(*options.resample_hz >= 1e-3 && *options.resample_hz <= 1e6))
    issues.push_back({"resample_hz", "must lie from 0.001 to 1e6 Hz, not " + fmt_num(*options.resample_hz), false});
  return issues.size() == before;
}

std::optional<std::string> read_checked(const std::string& path, const RecordingOptions& options,
                                        std::vector<Issue>& issues) {
  if (!check_options(options, issues)) return std::nullopt;
  return read_text_file(path, issues);  // a regular file only: a device or pipe would never end
}

std::optional<std::vector<std::size_t>> choose(const std::vector<std::string>& names,
                                               const std::vector<std::string>& wanted, const std::string& where,
                                               const std::string& kind, std::vector<Issue>& issues) {
  std::string list;
  for (const std::string& n : names) list += (list.empty() ? "" : ", ") + clip_text(n, 40);
  std::vector<std::size_t> index;
  for (const std::string& w : wanted) {
    const auto n = std::count(names.begin(), names.end(), w);
    if (n == 1) {
      index.push_back(static_cast<std::size_t>(std::find(names.begin(), names.end(), w) - names.begin()));
      continue;
    }
    issues.push_back({where,
                      n == 0
                          ? "no " + kind + " \"" + clip_text(w, 60) + "\" (" + kind + "s: " + clip_text(list, 300) + ")"
                          : kind + " \"" + clip_text(w, 60) + "\" appears " + std::to_string(n) + " times",
                      false});
  }
  if (index.size() != wanted.size()) return std::nullopt;
  return index;
}

bool finish(Recording& rec, const RecordingOptions& options, std::vector<Issue>& issues) {
  if (options.units == RecordingUnits::per_unit) {
    for (double& f : rec.frequency_hz) f *= options.base_hz;
    for (auto& [name, series] : rec.power_mw)
      for (double& p : series) p *= options.base_mw;
  }
  return !options.resample_hz || resample(rec, *options.resample_hz, "resampled", issues);
}

}  // namespace detail

std::optional<Recording> read_recording(const std::string& path, const RecordingOptions& options,
                                        std::vector<Issue>& issues) {
  const std::string ext = detail::lower_extension(path);
  if (ext == ".csv") return read_csv_recording(path, options, issues);
  if (ext == ".cfg") return read_comtrade_recording(path, options, issues);
  issues.push_back({path,
                    ext == ".dat" ? "give the COMTRADE record's .cfg, not its .dat"
                                  : "unknown kind of recording: the name must end in .csv or .cfg",
                    false});
  return std::nullopt;
}

}  // namespace droopline::study
