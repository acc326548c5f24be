// The configuration file (.cfg) of an IEEE C37.111 record, revisions 1999 and 2013. The line
// layout follows the standard's configuration-file clause as recalled from memory: station line,
// channel counts, analog then digital channel lines, line frequency, sampling rates, start and
// trigger times, file type, time multiplier; 2013 adds the time code and time quality lines.
#include <algorithm>
#include <cctype>

#include "droopline/format.hpp"
#include "droopline/recording.hpp"

namespace droopline::study {
namespace {

std::vector<std::string_view> split_commas(std::string_view line) {
  std::vector<std::string_view> out;
  while (true) {
    const auto comma = line.find(',');
    out.push_back(detail::trim(line.substr(0, comma)));
    if (comma == std::string_view::npos) return out;
    line.remove_prefix(comma + 1);
  }
}

std::string upper(std::string_view s) {
  std::string out(s);
  std::transform(out.begin(), out.end(), out.begin(), [](unsigned char c) { return std::toupper(c); });
  return out;
}

// Walks the lines in order; every error names the line it is about and stops the parse, since
// the lines after a bad one cannot be placed.
class CfgReader {
 public:
  CfgReader(std::string_view text, const std::string& name, std::vector<Issue>& issues)
      : lines_(detail::lines_of(text)), name_(name), issues_(issues) {}

  // The next line's fields, at least `min_fields` of them, or false with an error.
  bool next(const char* what, std::size_t min_fields, std::vector<std::string_view>& fields) {
    if (at_ >= lines_.size()) {
      line_ = lines_.size() + 1;
      return fail("the file ends where the " + std::string(what) + " line is expected");
    }
    line_ = ++at_;
    fields = split_commas(lines_[at_ - 1]);
    if (fields.size() < min_fields)
      return fail(std::string(what) + " line: " + std::to_string(fields.size()) + " fields, expected " +
                  std::to_string(min_fields));
    return true;
  }

  bool fail(const std::string& message) {
    issues_.push_back({name_ + " line " + std::to_string(line_), message, false});
    return false;
  }

  bool number(std::string_view field, const char* what, double& out) {
    if (detail::parse_number(field, out)) return true;
    return fail(std::string(what) + " \"" + clip_text(field, 40) + "\" is not a number");
  }

  // A whole number from `lo` to `hi`.
  bool whole(std::string_view field, const char* what, double lo, double hi, std::uint64_t& out) {
    double v = 0.0;
    if (!number(field, what, v)) return false;
    if (v != static_cast<double>(static_cast<std::int64_t>(v)) || v < lo || v > hi)
      return fail(std::string(what) + " " + fmt_num(v) + " is not a whole number from " + fmt_num(lo) + " to " +
                  fmt_num(hi));
    out = static_cast<std::uint64_t>(v);
    return true;
  }

  // `12A` or `3D`: the count before the letter.
  bool count(std::string_view field, char letter, std::uint64_t& out) {
    if (field.empty() || std::toupper(static_cast<unsigned char>(field.back())) != letter)
      return fail("channel count \"" + clip_text(field, 20) + "\" does not end in " + letter);
    field.remove_suffix(1);
    const char what[] = {'#', '#', letter, '\0'};
    return whole(field, what, 0, 1e6, out);
  }

  // `dd/mm/yyyy,hh:mm:ss.ssssss`; the number of decimals of the seconds, or -1 with an error.
  int stamp(const std::vector<std::string_view>& f, const char* what) {
    std::uint64_t d = 0, m = 0, y = 0, hh = 0, mm = 0;
    double ss = 0.0;
    const auto date = split_on(f[0], '/'), time = split_on(f[1], ':');
    if (date.size() != 3 || time.size() != 3) {
      fail(std::string(what) + " \"" + clip_text(std::string(f[0]) + "," + std::string(f[1]), 40) +
           "\" is not dd/mm/yyyy,hh:mm:ss.ssssss");
      return -1;
    }
    if (!whole(date[0], "day", 1, 31, d) || !whole(date[1], "month", 1, 12, m) || !whole(date[2], "year", 0, 9999, y) ||
        !whole(time[0], "hour", 0, 23, hh) || !whole(time[1], "minute", 0, 59, mm) || !number(time[2], "second", ss))
      return -1;
    if (ss < 0.0 || ss >= 61.0) {
      fail("second " + fmt_num(ss) + " is outside 0 to 60 (a leap second)");
      return -1;
    }
    const auto dot = time[2].find('.');
    return dot == std::string_view::npos ? 0 : static_cast<int>(time[2].size() - dot - 1);
  }

  // Lines left after the last field; only blank ones may follow.
  bool rest_blank() {
    for (; at_ < lines_.size(); ++at_) {
      if (detail::trim(lines_[at_]).empty()) continue;
      line_ = at_ + 1;
      return fail("unexpected text after the time multiplier" + std::string(rev2013_ ? " and time quality lines" : ""));
    }
    return true;
  }

  bool rev2013_ = false;

 private:
  static std::vector<std::string_view> split_on(std::string_view s, char sep) {
    std::vector<std::string_view> out;
    while (true) {
      const auto p = s.find(sep);
      out.push_back(detail::trim(s.substr(0, p)));
      if (p == std::string_view::npos) return out;
      s.remove_prefix(p + 1);
    }
  }

  std::vector<std::string_view> lines_;
  std::size_t at_ = 0, line_ = 0;
  const std::string& name_;
  std::vector<Issue>& issues_;
};

bool analog_line(CfgReader& r, std::size_t k, std::size_t line, ComtradeAnalog& ch) {
  std::vector<std::string_view> f;
  // An,ch_id,ph,ccbm,uu,a,b,skew,min,max,primary,secondary,PS
  if (!r.next("analog channel", 13, f)) return false;
  std::uint64_t index = 0;
  double lo = 0.0, hi = 0.0;
  if (!r.whole(f[0], "An", 1, 1e6, index)) return false;
  if (index != k + 1)
    return r.fail("analog channel number " + std::to_string(index) + ", expected " + std::to_string(k + 1));
  ch.ch_id = std::string(f[1]);
  ch.phase = std::string(f[2]);
  ch.element = std::string(f[3]);
  ch.unit = std::string(f[4]);
  ch.line = line;
  if (!r.number(f[5], "multiplier a", ch.a) || !r.number(f[6], "offset b", ch.b) ||
      !r.number(f[7], "skew", ch.skew_us) || !r.number(f[8], "min", lo) || !r.number(f[9], "max", hi) ||
      !r.number(f[10], "primary", ch.primary) || !r.number(f[11], "secondary", ch.secondary))
    return false;
  const std::string ps = upper(f[12]);
  if (ps != "P" && ps != "S") return r.fail("PS flag \"" + clip_text(f[12], 10) + "\" is neither P nor S");
  ch.secondary_values = ps == "S";
  if (ch.secondary_values && !(ch.primary > 0.0 && ch.secondary > 0.0))
    return r.fail("secondary values need primary and secondary above 0, not " + fmt_num(ch.primary) + " and " +
                  fmt_num(ch.secondary));
  return true;
}

}  // namespace

std::optional<ComtradeConfig> parse_comtrade_cfg(std::string_view text, const std::string& name,
                                                 std::vector<Issue>& issues) {
  CfgReader r(text, name, issues);
  ComtradeConfig cfg;
  std::vector<std::string_view> f;
  std::uint64_t total = 0, na = 0, nd = 0, nrates = 0;

  // station_name,rec_dev_id,rev_year
  if (!r.next("station", 2, f)) return std::nullopt;
  if (f.size() < 3 || f[2].empty())
    return r.fail("no revision year (a 1991 record?): revisions 1999 and 2013 are read"), std::nullopt;
  cfg.station = std::string(f[0]);
  cfg.device = std::string(f[1]);
  if (f[2] != "1999" && f[2] != "2013")
    return r.fail("revision year \"" + clip_text(f[2], 20) + "\" is not read (1999 and 2013 are)"), std::nullopt;
  cfg.revision = f[2] == "1999" ? 1999 : 2013;
  r.rev2013_ = cfg.revision == 2013;

  // TT,##A,##D
  if (!r.next("channel count", 3, f) || !r.whole(f[0], "TT", 0, 2e6, total) || !r.count(f[1], 'A', na) ||
      !r.count(f[2], 'D', nd))
    return std::nullopt;
  if (total != na + nd)
    return r.fail("TT " + std::to_string(total) + " is not " + std::to_string(na) + "A + " + std::to_string(nd) + "D"),
           std::nullopt;
  cfg.analogs.resize(na);
  for (std::size_t k = 0; k < na; ++k)
    if (!analog_line(r, k, 3 + k, cfg.analogs[k])) return std::nullopt;
  for (std::size_t k = 0; k < nd; ++k) {
    std::uint64_t index = 0;
    // Dn,ch_id,ph,ccbm,y (the state bits are not used here, only their place in the data)
    if (!r.next("digital channel", 2, f) || !r.whole(f[0], "Dn", 1, 1e6, index)) return std::nullopt;
    if (index != k + 1)
      return r.fail("digital channel number " + std::to_string(index) + ", expected " + std::to_string(k + 1)),
             std::nullopt;
  }
  cfg.digital_count = nd;

  if (!r.next("line frequency", 1, f) || !r.number(f[0], "line frequency", cfg.line_hz)) return std::nullopt;
  if (!r.next("sampling rate count", 1, f) || !r.whole(f[0], "nrates", 0, 999, nrates)) return std::nullopt;
  // nrates 0 still has one `0,endsamp` line: the times are then the .dat's timestamps.
  for (std::uint64_t k = 0; k < std::max<std::uint64_t>(nrates, 1); ++k) {
    ComtradeRate rate;
    std::uint64_t end = 0;
    if (!r.next("sampling rate", 2, f) || !r.number(f[0], "samp", rate.sample_hz) ||
        !r.whole(f[1], "endsamp", 1, 4294967295.0, end))
      return std::nullopt;
    rate.end_sample = end;
    if (nrates > 0 && !(rate.sample_hz > 0.0))
      return r.fail("sampling rate " + fmt_num(rate.sample_hz) + " Hz must be above 0"), std::nullopt;
    if (end <= cfg.samples)
      return r.fail("endsamp " + std::to_string(end) + " does not come after the previous " +
                    std::to_string(cfg.samples)),
             std::nullopt;
    cfg.samples = end;
    if (nrates > 0) cfg.rates.push_back(rate);
  }

  if (!r.next("start time", 2, f)) return std::nullopt;
  const int decimals = r.stamp(f, "start time");
  if (decimals < 0) return std::nullopt;
  cfg.start = std::string(f[0]) + "," + std::string(f[1]);
  // From memory: 2013 allows nanosecond time stamps, marked by nine decimals in the start time.
  cfg.timestamp_unit_s = decimals > 6 ? 1e-9 : 1e-6;
  if (!r.next("trigger time", 2, f) || r.stamp(f, "trigger time") < 0) return std::nullopt;
  cfg.trigger = std::string(f[0]) + "," + std::string(f[1]);

  if (!r.next("file type", 1, f)) return std::nullopt;
  const std::string ft = upper(f[0]);
  if (ft == "ASCII") {
    cfg.file_type = ComtradeFileType::ascii;
  } else if (ft == "BINARY") {
    cfg.file_type = ComtradeFileType::binary;
  } else if (ft == "BINARY32" || ft == "FLOAT32") {
    if (cfg.revision != 2013) return r.fail("file type " + ft + " needs revision 2013, not 1999"), std::nullopt;
    cfg.file_type = ft == "BINARY32" ? ComtradeFileType::binary32 : ComtradeFileType::float32;
  } else {
    return r.fail("unknown file type \"" + clip_text(f[0], 20) + "\" (ASCII, BINARY, BINARY32 or FLOAT32)"),
           std::nullopt;
  }
  if (!r.next("time multiplier", 1, f) || !r.number(f[0], "timemult", cfg.timemult)) return std::nullopt;
  if (!(cfg.timemult > 0.0)) return r.fail("timemult " + fmt_num(cfg.timemult) + " must be above 0"), std::nullopt;
  // A factor on counts of microseconds (or nanoseconds): beyond a million, one count is over a
  // second and sums of them run to infinity; no recorder writes that.
  if (cfg.timemult > 1e6) return r.fail("timemult " + fmt_num(cfg.timemult) + " must be at most 1e6"), std::nullopt;
  if (cfg.revision == 2013) {
    // time_code,local_code (offsets from UTC) and tmq_code,leapsec: read for their place only.
    if (!r.next("time code", 2, f) || !r.next("time quality", 2, f)) return std::nullopt;
  }
  if (!r.rest_blank()) return std::nullopt;
  return cfg;
}

}  // namespace droopline::study
