#include "droopline/comtrade.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ctime>

#include "droopline/format.hpp"

namespace droopline::study {
namespace {

std::string clean(std::string s) {
  std::replace(s.begin(), s.end(), ',', ' ');
  std::replace(s.begin(), s.end(), '\n', ' ');
  return s;
}

// dd/mm/yyyy,hh:mm:ss.ssssss (UTC), the date-time form of the 1999 revision.
std::string stamp(std::chrono::system_clock::time_point tp) {
  const auto us = std::chrono::duration_cast<std::chrono::microseconds>(tp.time_since_epoch()).count();
  std::time_t secs = static_cast<std::time_t>(us / 1000000);
  long long frac = us % 1000000;
  if (frac < 0) {
    frac += 1000000;
    --secs;
  }
  std::tm tm{};
  gmtime_r(&secs, &tm);
  char buf[64];
  std::snprintf(buf, sizeof buf, "%02d/%02d/%04d,%02d:%02d:%02d.%06lld", tm.tm_mday, tm.tm_mon + 1, tm.tm_year + 1900, tm.tm_hour,
                tm.tm_min, tm.tm_sec, frac);
  return buf;
}

}  // namespace

ComtradeRecord make_comtrade(const ComtradeInput& in) {
  ComtradeRecord out;
  const std::size_t w = in.columns.size();
  if (w < 2 || in.rows.size() < w || in.rows.size() % w != 0) {
    out.error = "no samples in the chosen window";
    return out;
  }
  const std::size_t n = in.rows.size() / w, nch = w - 1;
  constexpr double kSpan = 99999.0;  // ASCII data: integers within +-99999
  std::vector<double> a(nch), b(nch), lo(nch, INFINITY), hi(nch, -INFINITY);
  for (std::size_t r = 0; r < n; ++r)
    for (std::size_t c = 0; c < nch; ++c) {
      const double v = in.rows[r * w + c + 1];
      lo[c] = std::min(lo[c], v);
      hi[c] = std::max(hi[c], v);
    }
  std::string& cfg = out.cfg;
  cfg = clean(in.station) + "," + clean(in.device) + ",1999\r\n";
  cfg += std::to_string(nch) + "," + std::to_string(nch) + "A,0D\r\n";
  for (std::size_t c = 0; c < nch; ++c) {
    const std::string& col = in.columns[c + 1];
    const std::string unit = col.size() > 3 && col.compare(col.size() - 3, 3, "_hz") == 0 ? "Hz" : "MW";
    // The range over the counts, but no finer than 0.1 uHz or 1 W: a channel that barely moves
    // (rounding in the last digits) would otherwise spread its noise over all the counts.
    b[c] = 0.5 * (lo[c] + hi[c]);
    a[c] = std::max((hi[c] - lo[c]) / (2.0 * (kSpan - 1.0)), unit == "Hz" ? 1e-7 : 1e-6);
    const std::string element = col.substr(0, std::min(col.size(), col.rfind('.')));
    // An,ch_id,ph,ccbm,uu,a,b,skew,min,max,primary,secondary,PS
    cfg += std::to_string(c + 1) + "," + clean(col) + ",," + clean(element) + "," + unit + "," + fmt_exact(a[c]) + "," +
           fmt_exact(b[c]) + ",0,-99999,99999,1,1,P\r\n";
  }
  cfg += fmt_num(in.nominal_hz) + "\r\n";
  cfg += "1\r\n";
  cfg += fmt_exact(in.sample_hz) + "," + std::to_string(n) + "\r\n";
  const double t_first = in.rows[0];
  auto at = [&](double t_s) {
    return in.start + std::chrono::duration_cast<std::chrono::system_clock::duration>(std::chrono::duration<double>(t_s));
  };
  cfg += stamp(at(t_first)) + "\r\n";
  cfg += stamp(at(std::clamp(in.trigger_s, t_first, in.rows[(n - 1) * w]))) + "\r\n";
  // Timestamps count microseconds times the multiplier. The 1999 revision gives the field at most
  // ten digits, and a binary form holds it in 32 bits with all ones meaning "missing", so a record
  // longer than 71 minutes counts in tens (then hundreds...) of microseconds: the last timestamp
  // stays below 2^32 - 1 and any reader or converter keeps the times. The sampling rate above is
  // what readers take the times from; the timestamps say the same, coarser on a long record.
  const double span_us = (in.rows[(n - 1) * w] - t_first) * 1e6;
  double timemult = 1.0;
  while (std::llround(span_us / timemult) >= 4294967295LL) timemult *= 10.0;
  cfg += "ASCII\r\n" + std::to_string(std::llround(timemult)) + "\r\n";  // file type; time multiplier

  std::string& dat = out.dat;
  dat.reserve(n * (16 + nch * 8));
  char buf[32];
  for (std::size_t r = 0; r < n; ++r) {
    const long long stamp_count = std::llround((in.rows[r * w] - t_first) * 1e6 / timemult);
    std::snprintf(buf, sizeof buf, "%zu,%lld", r + 1, stamp_count);
    dat += buf;
    for (std::size_t c = 0; c < nch; ++c) {
      const long long x = std::llround((in.rows[r * w + c + 1] - b[c]) / a[c]);
      std::snprintf(buf, sizeof buf, ",%lld", std::clamp(x, -99999LL, 99999LL));
      dat += buf;
    }
    dat += "\r\n";
  }
  return out;
}

}  // namespace droopline::study
