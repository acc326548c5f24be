// The data file (.dat) of an IEEE C37.111 record and the recording made of it. Record layouts and
// missing-value marks follow the standard's data-file clause as recalled from memory: a record is
// the sample number and the timestamp (ASCII fields, or little-endian uint32 each), the analog
// values (ASCII, int16, int32 or IEEE float32) and the digital states (ASCII fields, or 16 to
// a little-endian word); a missing analog value is a blank ASCII field, 0x8000 in BINARY or
// 0x80000000 in BINARY32, a missing timestamp 0xFFFFFFFF in the binary forms.
#include <algorithm>
#include <bit>
#include <cctype>
#include <cmath>
#include <filesystem>
#include <functional>

#include "droopline/format.hpp"
#include "droopline/recording.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {
namespace {

// What the .dat holds for the chosen channels, before scaling.
struct Samples {
  std::vector<double> stamp;  // timestamp counts
  std::vector<char> stamp_missing;
  std::vector<std::vector<double>> raw;  // per chosen channel
  std::vector<std::vector<char>> missing;
  std::string name;        // the .dat, for messages
  std::size_t record = 0;  // binary record length (bytes); 0 for ASCII

  // A sample's place for messages about its time: its ASCII line, or its binary timestamp's byte.
  std::string where(std::size_t i) const {
    return name + (record == 0 ? " line " + std::to_string(i + 1) : " byte " + std::to_string(i * record + 4));
  }
};

std::size_t value_bytes(ComtradeFileType ft) { return ft == ComtradeFileType::binary ? 2 : 4; }

std::size_t record_bytes(const ComtradeConfig& cfg) {
  return 8 + cfg.analogs.size() * value_bytes(cfg.file_type) + 2 * ((cfg.digital_count + 15) / 16);
}

std::uint32_t u32_at(std::string_view d, std::size_t at) {
  const auto* p = reinterpret_cast<const unsigned char*>(d.data() + at);
  return p[0] | (p[1] << 8) | (p[2] << 16) | (std::uint32_t{p[3]} << 24);
}

std::uint32_t u16_at(std::string_view d, std::size_t at) {
  const auto* p = reinterpret_cast<const unsigned char*>(d.data() + at);
  return p[0] | (p[1] << 8);
}

void resize(Samples& s, std::size_t n, std::size_t channels) {
  s.stamp.assign(n, 0.0);
  s.stamp_missing.assign(n, 0);
  s.raw.assign(channels, std::vector<double>(n, 0.0));
  s.missing.assign(channels, std::vector<char>(n, 0));
}

bool read_binary(const ComtradeConfig& cfg, const std::vector<std::size_t>& chosen, std::string_view dat,
                 const std::string& name, Samples& s, std::vector<Issue>& issues) {
  const std::size_t rec = record_bytes(cfg), size = dat.size(), vb = value_bytes(cfg.file_type);
  auto fail = [&](std::size_t byte, const std::string& message) {
    issues.push_back({name + " byte " + std::to_string(byte), message, false});
    return false;
  };
  const std::string layout = std::to_string(rec) + " bytes (8 + " + std::to_string(cfg.analogs.size()) + " x " +
                             std::to_string(vb) + " analog + " + std::to_string(2 * ((cfg.digital_count + 15) / 16)) +
                             " digital)";
  if (size % rec != 0)
    return fail(size - size % rec,
                "a partial record of " + std::to_string(size % rec) + " bytes; records are " + layout);
  if (size / rec < cfg.samples)
    return fail(size, "the data ends after " + std::to_string(size / rec) + " of the " + std::to_string(cfg.samples) +
                          " samples the .cfg gives (records of " + layout + ")");
  if (size / rec > cfg.samples)
    return fail(cfg.samples * rec, "more data than the " + std::to_string(cfg.samples) + " samples the .cfg gives");
  resize(s, cfg.samples, chosen.size());
  s.name = name;
  s.record = rec;
  for (std::size_t i = 0; i < cfg.samples; ++i) {
    const std::size_t at = i * rec;
    const std::uint32_t ts = u32_at(dat, at + 4);
    s.stamp[i] = ts;
    s.stamp_missing[i] = ts == 0xFFFFFFFFu;
    for (std::size_t c = 0; c < chosen.size(); ++c) {
      const std::size_t vat = at + 8 + chosen[c] * vb;
      const std::uint32_t bits = vb == 2 ? u16_at(dat, vat) : u32_at(dat, vat);
      if (cfg.file_type == ComtradeFileType::float32) {
        const float v = std::bit_cast<float>(bits);
        if (!std::isfinite(v))
          return fail(vat, "channel \"" + clip_text(cfg.analogs[chosen[c]].ch_id, 40) + "\" holds a non-finite value");
        s.raw[c][i] = v;
      } else if (vb == 2) {
        s.missing[c][i] = bits == 0x8000u;
        s.raw[c][i] = static_cast<std::int16_t>(static_cast<std::uint16_t>(bits));
      } else {
        s.missing[c][i] = bits == 0x80000000u;
        s.raw[c][i] = static_cast<std::int32_t>(bits);
      }
    }
  }
  return true;
}

bool read_ascii(const ComtradeConfig& cfg, const std::vector<std::size_t>& chosen, std::string_view dat,
                const std::string& name, Samples& s, std::vector<Issue>& issues) {
  auto lines = detail::lines_of(dat);
  while (!lines.empty() && detail::trim(lines.back()).empty()) lines.pop_back();
  auto fail = [&](std::size_t line, const std::string& message) {
    issues.push_back({name + " line " + std::to_string(line), message, false});
    return false;
  };
  if (lines.size() < cfg.samples)
    return fail(lines.size() + 1, "the data ends after " + std::to_string(lines.size()) + " of the " +
                                      std::to_string(cfg.samples) + " samples the .cfg gives");
  if (lines.size() > cfg.samples)
    return fail(cfg.samples + 1, "more data than the " + std::to_string(cfg.samples) + " samples the .cfg gives");
  const std::size_t na = cfg.analogs.size(), width = 2 + na + cfg.digital_count;
  resize(s, cfg.samples, chosen.size());
  s.name = name;
  std::vector<std::string_view> f;
  for (std::size_t i = 0; i < cfg.samples; ++i) {
    f.clear();
    for (std::string_view line = lines[i];;) {
      const auto comma = line.find(',');
      f.push_back(detail::trim(line.substr(0, comma)));
      if (comma == std::string_view::npos) break;
      line.remove_prefix(comma + 1);
    }
    if (f.size() != width)
      return fail(i + 1, std::to_string(f.size()) + " fields, expected " + std::to_string(width) + " (sample number, " +
                             "timestamp, " + std::to_string(na) + " analog, " + std::to_string(cfg.digital_count) +
                             " digital)");
    double v = 0.0;
    if (!detail::parse_number(f[0], v))
      return fail(i + 1, "sample number \"" + clip_text(f[0], 20) + "\" is not a number");
    s.stamp_missing[i] = f[1].empty();
    if (!f[1].empty() && !detail::parse_number(f[1], s.stamp[i]))
      return fail(i + 1, "timestamp \"" + clip_text(f[1], 20) + "\" is not a number");
    // Every analog field is checked, chosen or not: a damaged line is damaged whichever is read.
    for (std::size_t a = 0; a < na; ++a)
      if (!f[2 + a].empty() && !detail::parse_number(f[2 + a], v))
        return fail(i + 1, "channel \"" + clip_text(cfg.analogs[a].ch_id, 40) + "\" value \"" +
                               clip_text(f[2 + a], 20) + "\" is not a number");
    for (std::size_t c = 0; c < chosen.size(); ++c) {
      s.missing[c][i] = f[2 + chosen[c]].empty();
      if (!s.missing[c][i]) detail::parse_number(f[2 + chosen[c]], s.raw[c][i]);
    }
  }
  return true;
}

// Sample times (s) from the rates, or from the timestamps when there are none.
bool times_of(const ComtradeConfig& cfg, const Samples& s, std::vector<double>& t, std::vector<Issue>& issues) {
  t.resize(s.stamp.size());
  if (cfg.rates.empty()) {
    for (std::size_t i = 0; i < t.size(); ++i) {
      if (s.stamp_missing[i]) {
        issues.push_back({s.where(i), "missing timestamp, and the .cfg gives no sampling rate to stand in", false});
        return false;
      }
      t[i] = s.stamp[i] * cfg.timemult * cfg.timestamp_unit_s;
      if (i > 0 && !(t[i] > t[i - 1])) {
        issues.push_back(
            {s.where(i),
             "timestamp " + fmt_num(s.stamp[i]) + " does not come after the previous " + fmt_num(s.stamp[i - 1]),
             false});
        return false;
      }
    }
    return true;
  }
  // The interval before a sample is the one of the rate it was taken at. Each time is counted
  // from the last sample of the rate before (samples over rate, not a running sum of intervals:
  // 6,000 sums of 0.1 s come to 600.00000000007 s, and the last sample fell outside a 600 s run).
  std::size_t k = 0, anchor_i = 0;
  double anchor_t = 0.0;
  for (std::size_t i = 0; i < t.size(); ++i) {
    while (i + 1 > cfg.rates[k].end_sample) {
      ++k;
      if (i > 0) {
        anchor_i = i - 1;
        anchor_t = t[i - 1];
      }
    }
    t[i] = i == 0 ? 0.0 : anchor_t + static_cast<double>(i - anchor_i) / cfg.rates[k].sample_hz;
  }
  return true;
}

// The highest of the .cfg's sampling rates (0 without any).
double highest_rate(const ComtradeConfig& cfg) {
  double top = 0.0;
  for (const ComtradeRate& r : cfg.rates) top = std::max(top, r.sample_hz);
  return top;
}

// When the .cfg gives sampling rates the times come from them and the .dat's timestamps are not
// used; a recorder whose timestamps tell another story (a wrong rate in the .cfg, samples lost)
// is worth a warning: by how much, and where. Half the shortest interval is let pass (timestamps
// are whole counts of their unit), and so are timestamps that never change (a writer that leaves
// them at 0 because the rate is what counts).
std::optional<std::string> stamps_disagree(const ComtradeConfig& cfg, const Samples& s, const std::vector<double>& t) {
  if (cfg.rates.empty()) return std::nullopt;
  const double top_hz = highest_rate(cfg);
  const double unit_s = cfg.timemult * cfg.timestamp_unit_s;
  std::optional<std::size_t> first;
  std::size_t worst = 0;
  double worst_d = 0.0;
  bool moved = false;
  for (std::size_t i = 0; i < t.size(); ++i) {
    if (s.stamp_missing[i]) continue;
    if (!first) {
      first = i;
      continue;
    }
    moved = moved || s.stamp[i] != s.stamp[*first];
    const double d = (s.stamp[i] - s.stamp[*first]) * unit_s - (t[i] - t[*first]);
    if (std::abs(d) > std::abs(worst_d)) {
      worst_d = d;
      worst = i;
    }
  }
  if (!moved || !(std::abs(worst_d) > 0.5 / top_hz)) return std::nullopt;
  const double by_stamp = t[*first] + (s.stamp[worst] - s.stamp[*first]) * unit_s;
  return "the .dat's timestamps disagree with the .cfg's sampling rate by up to " + fmt_num(std::abs(worst_d)) +
         " s (" + s.where(worst) + ": " + fmt_num(by_stamp) + " s by its timestamp, " + fmt_num(t[worst]) +
         " s by the rate); the times follow the rate";
}

// MW or Hz per recorded unit, for the units a plant recorder writes; nothing for others.
std::optional<double> unit_factor(const std::string& unit, bool frequency) {
  if (frequency) {
    if (unit == "Hz") return 1.0;
    if (unit == "kHz") return 1e3;
    return std::nullopt;
  }
  if (unit == "W") return 1e-6;
  if (unit == "kW") return 1e-3;
  if (unit == "MW") return 1.0;
  if (unit == "GW") return 1e3;
  return std::nullopt;
}

// The recording of a parsed .cfg's text: `dat_of` gives the data (and its name for messages) once
// the .cfg has been read and its channels chosen, so a broken .cfg is reported before a missing .dat.
std::optional<Recording> read_comtrade(
    std::string_view cfg_text, const std::string& path, const RecordingOptions& options,
    const std::function<std::optional<std::string_view>(std::string& dat_path, std::vector<Issue>&)>& dat_of,
    std::vector<Issue>& issues) {
  if (!detail::check_options(options, issues)) return std::nullopt;
  const auto cfg = parse_comtrade_cfg(cfg_text, path, issues);
  if (!cfg) return std::nullopt;

  std::vector<std::string> wanted{options.frequency_column};
  wanted.insert(wanted.end(), options.power_columns.begin(), options.power_columns.end());
  std::vector<std::string> names;
  for (const ComtradeAnalog& a : cfg->analogs) names.push_back(a.ch_id);
  const auto picked = detail::choose(names, wanted, path, "channel", issues);
  if (!picked) return std::nullopt;
  const std::vector<std::size_t>& chosen = *picked;

  std::string dat_path;
  const auto dat = dat_of(dat_path, issues);
  if (!dat) return std::nullopt;
  Samples s;
  const bool ok = cfg->file_type == ComtradeFileType::ascii ? read_ascii(*cfg, chosen, *dat, dat_path, s, issues)
                                                            : read_binary(*cfg, chosen, *dat, dat_path, s, issues);
  Recording rec;
  if (!ok || !times_of(*cfg, s, rec.t_s, issues)) return std::nullopt;
  if (auto w = stamps_disagree(*cfg, s, rec.t_s)) rec.warnings.push_back(std::move(*w));
  if (rec.t_s.size() < 2) {
    issues.push_back({dat_path, "needs at least two samples, has " + std::to_string(rec.t_s.size()), false});
    return std::nullopt;
  }
  rec.source = path;
  for (std::size_t c = 0; c < chosen.size(); ++c) {
    const ComtradeAnalog& ch = cfg->analogs[chosen[c]];
    const std::size_t absent = static_cast<std::size_t>(std::count(s.missing[c].begin(), s.missing[c].end(), 1));
    if (absent == s.missing[c].size()) {
      issues.push_back({dat_path, "channel \"" + clip_text(ch.ch_id, 40) + "\" has no value at all", false});
      return std::nullopt;
    }
    // Recorded value a * x + b; a secondary value times the ratio is the primary one.
    const double ratio = ch.secondary_values ? ch.primary / ch.secondary : 1.0;
    std::optional<double> factor = 1.0;
    if (options.units == RecordingUnits::physical) {
      factor = unit_factor(ch.unit, c == 0);
      if (!factor)
        rec.warnings.push_back("channel \"" + ch.ch_id + "\" is in \"" + ch.unit + "\", taken as " +
                               (c == 0 ? "Hz" : "MW"));
    }
    // Skew (the channel's sampling delay) is microseconds against steps of 1 ms and more in the
    // recordings fitted here: said, not corrected, so a fast record's user knows.
    if (ch.skew_us != 0.0)
      rec.warnings.push_back("channel \"" + ch.ch_id + "\": skew of " + fmt_num(ch.skew_us) + " us not applied");
    std::vector<double> v(s.raw[c].size());
    for (std::size_t i = 0; i < v.size(); ++i) v[i] = (ch.a * s.raw[c][i] + ch.b) * ratio * factor.value_or(1.0);
    if (absent > 0) {
      detail::fill_missing(rec.t_s, v, s.missing[c]);
      rec.warnings.push_back("channel \"" + ch.ch_id + "\": " + std::to_string(absent) +
                             " missing samples filled by linear interpolation in time");
    }
    if (c == 0)
      rec.frequency_hz = std::move(v);
    else
      rec.power_mw.emplace_back(ch.ch_id, std::move(v));
  }
  if (cfg->rates.size() > 1 && !options.resample_hz) {
    if (!detail::resample(rec, highest_rate(*cfg), std::to_string(cfg->rates.size()) + " sampling rates: resampled",
                          issues))
      return std::nullopt;
  }
  if (!detail::finish(rec, options, issues)) return std::nullopt;
  return rec;
}

}  // namespace

std::optional<Recording> read_comtrade_recording(const std::string& path, const RecordingOptions& options,
                                                 std::vector<Issue>& issues) {
  const auto text = detail::read_checked(path, options, issues);
  if (!text) return std::nullopt;
  std::string dat_text;
  return read_comtrade(
      *text, path, options,
      [&path, &dat_text](std::string& dat_path, std::vector<Issue>& out) -> std::optional<std::string_view> {
        // The .dat beside the .cfg: same stem, either case of extension (recorders write both).
        const std::string stem = path.substr(0, path.size() - 4);
        dat_path = stem + ".dat";
        if (!std::filesystem::exists(dat_path) && std::filesystem::exists(stem + ".DAT")) dat_path = stem + ".DAT";
        if (!std::filesystem::exists(dat_path)) {
          out.push_back({path, "no data file beside it (" + stem + ".dat or .DAT)", false});
          return std::nullopt;
        }
        auto read = read_text_file(dat_path, out);
        if (!read) return std::nullopt;
        dat_text = std::move(*read);
        return std::string_view(dat_text);
      },
      issues);
}

std::optional<Recording> read_comtrade_recording_data(std::string_view cfg_text, std::string_view dat_bytes,
                                                      const std::string& name, const RecordingOptions& options,
                                                      std::vector<Issue>& issues) {
  std::string ext = name.size() >= 4 ? name.substr(name.size() - 4) : std::string();
  std::transform(ext.begin(), ext.end(), ext.begin(), [](unsigned char c) { return std::tolower(c); });
  const std::string dat_name = (ext == ".cfg" ? name.substr(0, name.size() - 4) : name) + ".dat";
  return read_comtrade(
      cfg_text, name, options,
      [&dat_name, dat_bytes](std::string& dat_path, std::vector<Issue>&) -> std::optional<std::string_view> {
        dat_path = dat_name;
        return dat_bytes;
      },
      issues);
}

}  // namespace droopline::study
