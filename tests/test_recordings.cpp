// Reading recordings: COMTRADE records of each data format laid out by hand from the standard's
// file layout (clauses from memory), records written by droopline's own writer read back, and CSV
// files with named, quoted, per-unit and several power columns. Every expected value is computed
// here from the raw numbers written.
#include <chrono>
#include <cmath>
#include <functional>

#include "droopline/comtrade.hpp"
#include "recordings_support.hpp"

using namespace droopline;
using namespace droopline::study;
using namespace rec_test;

namespace {

constexpr double kTol = 1e-9;

// Each sample of `got` against `scale(x)` of the raw value of channel `k` in `rows`.
void expect_series(const std::vector<double>& got, const std::vector<Row>& rows, std::size_t k,
                   const std::function<double(double)>& scale) {
  REQUIRE(got.size() == rows.size());
  for (std::size_t i = 0; i < rows.size(); ++i) {
    INFO("sample " << i);
    REQUIRE(rows[i].x[k]);
    CHECK(got[i] == Approx(scale(*rows[i].x[k])).margin(kTol));
  }
}

RecordingOptions channels(const std::string& f, std::vector<std::string> p) {
  RecordingOptions o;
  o.frequency_column = f;
  o.power_columns = std::move(p);
  return o;
}

Layout plant(const std::string& revision, const std::string& file_type) {
  Layout l;
  l.revision = revision;
  l.file_type = file_type;
  l.analogs = {{"F", "Hz", 0.001, 50.0}, {"G1.P", "MW", 0.05, 100.0}, {"G2.P", "MW", 0.05, 80.0}};
  return l;
}

}  // namespace

TEST_CASE("1999 ASCII: rate, scaling a*x+b, digital fields skipped", "[recordings]") {
  const auto dir = temp_folder("ascii1999");
  Layout l = plant("1999", "ASCII");
  l.digitals = 2;
  l.rates = {{10.0, 12}};
  std::vector<Row> rows;
  for (int i = 0; i < 12; ++i)
    rows.push_back({std::uint32_t(100000 * i), {-20.0 * i, 30.0 * i - 7, 15.0 * i}, {i % 2, 1}});
  const Recording r = read_ok(write_record(dir, "dip", l, rows), channels("F", {"G1.P", "G2.P"}));
  REQUIRE(r.t_s.size() == 12);
  for (std::size_t i = 0; i < 12; ++i) CHECK(r.t_s[i] == Approx(static_cast<double>(i) / 10.0).margin(kTol));
  expect_series(r.frequency_hz, rows, 0, [](double x) { return 0.001 * x + 50.0; });
  REQUIRE(r.power_mw.size() == 2);
  CHECK(r.power_mw[0].first == "G1.P");
  CHECK(r.power_mw[1].first == "G2.P");
  expect_series(r.power_mw[0].second, rows, 1, [](double x) { return 0.05 * x + 100.0; });
  expect_series(r.power_mw[1].second, rows, 2, [](double x) { return 0.05 * x + 80.0; });
  CHECK(r.warnings.empty());
  CHECK(r.source == (dir / "dip.cfg").string());
}

TEST_CASE("1999 BINARY: int16 values, no rate so the timestamps times timemult", "[recordings]") {
  const auto dir = temp_folder("binary1999");
  Layout l = plant("1999", "BINARY");
  l.analogs[1].a = 0.01;
  l.analogs[1].b = 0.0;
  l.digitals = 3;
  l.rates = {{0.0, 8}};  // nrates 0
  l.timemult = 2.5;
  std::vector<Row> rows;
  std::vector<double> stamps;
  for (int i = 0; i < 8; ++i) {
    stamps.push_back(40000.0 * i + 100.0 * i * i);  // uneven spacing, kept as recorded
    rows.push_back({std::uint32_t(stamps.back()), {-3000.0 + 400 * i, 12000.0 - 2500 * i, 7.0}, {1, 0, i % 2}});
  }
  const Recording r = read_ok(write_record(dir, "trip", l, rows), channels("F", {"G1.P"}));
  REQUIRE(r.t_s.size() == 8);
  for (std::size_t i = 0; i < 8; ++i) CHECK(r.t_s[i] == Approx(stamps[i] * 2.5e-6).margin(kTol));
  expect_series(r.frequency_hz, rows, 0, [](double x) { return 0.001 * x + 50.0; });
  expect_series(r.power_mw[0].second, rows, 1, [](double x) { return 0.01 * x; });
  CHECK(r.power_mw[0].second.back() < 0.0);  // the raw value went negative: read as signed
}

TEST_CASE("2013 BINARY32: int32 values beyond 16 bits, two digital words, a kW channel", "[recordings]") {
  const auto dir = temp_folder("binary32");
  Layout l = plant("2013", "BINARY32");
  l.analogs = {{"F", "Hz", 1e-6, 50.0}, {"G1.P", "kW", 0.5, 0.0}};
  l.digitals = 20;
  l.rates = {{25.0, 30}};
  std::vector<Row> rows;
  for (int i = 0; i < 30; ++i)
    rows.push_back({0u, {-150000.0 + 5000 * i, 200000.0 + 12345 * i}, std::vector<int>(20, i % 3 == 0)});
  const Recording r = read_ok(write_record(dir, "b32", l, rows), channels("F", {"G1.P"}));
  REQUIRE(r.t_s.size() == 30);
  CHECK(r.t_s.back() == Approx(29.0 / 25.0).margin(kTol));
  expect_series(r.frequency_hz, rows, 0, [](double x) { return 1e-6 * x + 50.0; });
  expect_series(r.power_mw[0].second, rows, 1, [](double x) { return 0.5 * x * 1e-3; });  // kW to MW
}

TEST_CASE("2013 FLOAT32: IEEE floats, nanosecond timestamps", "[recordings]") {
  const auto dir = temp_folder("float32");
  Layout l = plant("2013", "FLOAT32");
  l.analogs = {{"F", "Hz", 1.0, 0.0}, {"G1.P", "MW", 2.0, 1.0}};
  l.rates = {{0.0, 16}};
  l.start = "03/12/2026,09:30:00.000000000";  // nine decimals: timestamps in ns (from memory)
  std::vector<Row> rows;
  for (int i = 0; i < 16; ++i)
    rows.push_back({std::uint32_t(20000000u * i), {49.95 + 0.0013 * i, 250.5 - 0.37 * i}, {}});
  const Recording r = read_ok(write_record(dir, "f32", l, rows), channels("F", {"G1.P"}));
  for (std::size_t i = 0; i < 16; ++i) CHECK(r.t_s[i] == Approx(0.02 * static_cast<double>(i)).margin(kTol));
  // The file holds floats: the expected value is the float nearest the raw number.
  expect_series(r.frequency_hz, rows, 0, [](double x) { return static_cast<double>(static_cast<float>(x)); });
  expect_series(r.power_mw[0].second, rows, 1, [](double x) { return 2.0 * static_cast<float>(x) + 1.0; });
}

TEST_CASE("two sampling rates go onto one uniform grid", "[recordings]") {
  const auto dir = temp_folder("rates");
  Layout l = plant("1999", "ASCII");
  l.rates = {{10.0, 20}, {5.0, 30}};  // samples 1-20 at 10 Hz, 21-30 at 5 Hz
  std::vector<Row> rows;
  std::vector<double> t;
  for (int i = 0; i < 30; ++i) {
    t.push_back(i < 20 ? 0.1 * i : 1.9 + 0.2 * (i - 19));
    // Raw values linear in time, so any correct linear resampling gives the line itself.
    rows.push_back({0u, {std::round(100.0 * t.back()), std::round(2000.0 - 500.0 * t.back()), 0.0}, {}});
  }
  const std::string cfg = write_record(dir, "rates", l, rows);
  const auto f_at = [](double s) { return 0.001 * 100.0 * s + 50.0; };
  const auto p_at = [](double s) { return 0.05 * (2000.0 - 500.0 * s) + 100.0; };

  // No resample_hz: onto the highest rate (10 Hz); else onto the rate asked for.
  for (const double hz : {0.0, 4.0}) {
    DYNAMIC_SECTION("resample_hz " << hz) {
      RecordingOptions o = channels("F", {"G1.P"});
      if (hz > 0.0) o.resample_hz = hz;
      const double grid_hz = hz > 0.0 ? hz : 10.0;
      const Recording r = read_ok(cfg, o);
      const auto n = static_cast<std::size_t>(std::floor(t.back() * grid_hz + 1e-9)) + 1;  // 3.9 s of samples
      REQUIRE(r.t_s.size() == n);
      for (std::size_t j = 0; j < n; ++j) {
        const double s = static_cast<double>(j) / grid_hz;
        CHECK(r.t_s[j] == Approx(s).margin(kTol));
        CHECK(r.frequency_hz[j] == Approx(f_at(s)).margin(1e-9));
        CHECK(r.power_mw[0].second[j] == Approx(p_at(s)).margin(1e-9));
      }
      CHECK(warned(r, hz > 0.0 ? "resampled onto 4 Hz" : "2 sampling rates"));
    }
  }
}

TEST_CASE("timestamps that disagree with the .cfg rate are warned of, and the times follow the rate", "[recordings]") {
  const auto dir = temp_folder("stamps");
  Layout l = plant("1999", "ASCII");
  l.rates = {{10.0, 12}};
  // Timestamps in microseconds (the 1999 unit): `step_us` apart, each off by `wobble_us` at odd samples.
  const auto record = [&](const std::string& name, std::uint32_t step_us, std::uint32_t wobble_us,
                          std::uint32_t start_us) {
    std::vector<Row> rows;
    for (std::uint32_t i = 0; i < 12; ++i)
      rows.push_back({start_us + step_us * i + (i % 2) * wobble_us, {double(i), 0.0, 0.0}, {}});
    return read_ok(write_record(dir, name, l, rows), channels("F", {"G1.P"}));
  };
  const auto stamp_warnings = [](const Recording& r) {
    std::vector<std::string> w;
    for (const std::string& x : r.warnings)
      if (x.find("timestamps disagree") != std::string::npos) w.push_back(x);
    return w;
  };
  // Twice the rate's interval: 1.1 s late by the last sample (2.2 s by its stamp, 1.1 s by the rate).
  const Recording slow = record("slow", 200000, 0, 0);
  REQUIRE(stamp_warnings(slow).size() == 1);
  CHECK(stamp_warnings(slow)[0] ==
        "the .dat's timestamps disagree with the .cfg's sampling rate by up to 1.1 s (" + (dir / "slow.dat").string() +
            " line 12: 2.2 s by its timestamp, 1.1 s by the rate); the times follow the rate");
  for (std::size_t i = 0; i < 12; ++i) CHECK(slow.t_s[i] == Approx(0.1 * double(i)).margin(kTol));
  // Within half an interval (a recorder's clock a little off), from a non-zero start, and stamps
  // left at 0: no warning.
  CHECK(stamp_warnings(record("wobble", 100000, 40000, 5000000)).empty());
  CHECK(stamp_warnings(record("zeros", 0, 0, 0)).empty());
  CHECK(stamp_warnings(record("late", 100000, 60000, 0)).size() == 1);
}

TEST_CASE("missing samples are interpolated in time and counted", "[recordings]") {
  for (const std::string ft : {"ASCII", "BINARY", "BINARY32"}) {
    DYNAMIC_SECTION(ft) {
      const auto dir = temp_folder("missing-" + ft);
      Layout l = plant(ft == "BINARY32" ? "2013" : "1999", ft);
      l.rates = {{0.0, 8}};  // uneven times, so interpolation must weigh by time, not by index
      std::vector<Row> rows;
      std::vector<double> t;
      for (int i = 0; i < 8; ++i) {
        t.push_back((50000.0 * i + 7000.0 * i * i) * 1e-6);
        rows.push_back({std::uint32_t(50000 * i + 7000 * i * i), {10.0 * i * i, 300.0 - 11 * i, 5.0}, {}});
      }
      std::vector<Row> holed = rows;
      holed[3].x[0].reset();
      holed[4].x[0].reset();
      holed[0].x[1].reset();  // at the start: held at the first value present
      const Recording r = read_ok(write_record(dir, "holes", l, holed), channels("F", {"G1.P"}));
      const auto f = [&](int i) { return 0.001 * *rows[i].x[0] + 50.0; };
      for (int i : {0, 1, 2, 5, 6, 7}) CHECK(r.frequency_hz[i] == Approx(f(i)).margin(kTol));
      for (int i : {3, 4}) CHECK(r.frequency_hz[i] == Approx(f(2) + (f(5) - f(2)) * (t[i] - t[2]) / (t[5] - t[2])));
      CHECK(r.power_mw[0].second[0] == Approx(0.05 * *rows[1].x[1] + 100.0));
      CHECK(warned(r, "channel \"F\": 2 missing samples"));
      CHECK(warned(r, "channel \"G1.P\": 1 missing samples"));
    }
  }
}

TEST_CASE("secondary values are turned into primary ones by the ratio", "[recordings]") {
  const auto dir = temp_folder("secondary");
  Layout l = plant("1999", "ASCII");
  // A transducer behind 2000:5 instrument transformers; G2.P states the same ratio but holds primary values.
  l.analogs[1] = {"G1.P", "MW", 0.001, 0.0, 2000.0, 5.0, "S"};
  l.analogs[2] = {"G2.P", "MW", 0.001, 0.0, 2000.0, 5.0, "P", 20.0};
  std::vector<Row> rows;
  for (int i = 0; i < 10; ++i) rows.push_back({0u, {-i * 3.0, 500.0 + i, 500.0 + i}, {}});
  const Recording r = read_ok(write_record(dir, "ct", l, rows), channels("F", {"G1.P", "G2.P"}));
  expect_series(r.power_mw[0].second, rows, 1, [](double x) { return 0.001 * x * (2000.0 / 5.0); });
  expect_series(r.power_mw[1].second, rows, 2, [](double x) { return 0.001 * x; });
  CHECK(warned(r, "channel \"G2.P\": skew of 20 us not applied"));
  CHECK_FALSE(warned(r, "channel \"G1.P\": skew"));
}

TEST_CASE("the .dat is found beside the .cfg in either case", "[recordings]") {
  const auto dir = temp_folder("upper");
  Layout l = plant("1999", "BINARY");
  std::vector<Row> rows;
  for (int i = 0; i < 10; ++i) rows.push_back({0u, {1.0 * i, 2.0 * i, 3.0 * i}, {}});
  write(dir / "UP.cfg", cfg_of(l));
  write(dir / "UP.DAT", binary_of("BINARY", rows));
  const Recording r = read_ok((dir / "UP.cfg").string(), channels("F", {"G2.P"}));
  expect_series(r.power_mw[0].second, rows, 2, [](double x) { return 0.05 * x + 80.0; });
}

TEST_CASE("records from droopline's COMTRADE writer read back within its resolution", "[recordings]") {
  const auto dir = temp_folder("writer");
  ComtradeInput in;
  in.station = "Kestrel Bay";
  in.columns = {"t_s", "north.f_hz", "g1.p_mw", "g2.p_mw"};
  in.sample_hz = 10.0;
  const int n = 600;
  for (int i = 0; i < n; ++i) {
    const double t = 100.0 + 0.1 * i;  // a window that does not start at zero
    in.rows.insert(in.rows.end(), {t, 50.0 - 0.4 * std::exp(-0.05 * i) * std::sin(0.07 * i),
                                   210.0 + 35.0 * std::tanh(0.03 * i), 95.5 - 0.01 * i});
  }
  in.start = std::chrono::system_clock::time_point{} + std::chrono::hours(24 * 20000);
  const ComtradeRecord rec = make_comtrade(in);
  REQUIRE(rec.error.empty());
  write(dir / "rec.cfg", rec.cfg);
  write(dir / "rec.dat", rec.dat);
  std::vector<Issue> issues;
  const auto cfg = parse_comtrade_cfg(rec.cfg, "rec.cfg", issues);
  REQUIRE(cfg);
  CHECK(cfg->revision == 1999);
  REQUIRE(cfg->analogs.size() == 3);
  const Recording r = read_ok((dir / "rec.cfg").string(), channels("north.f_hz", {"g1.p_mw", "g2.p_mw"}));
  REQUIRE(r.t_s.size() == static_cast<std::size_t>(n));
  const std::vector<const std::vector<double>*> got{&r.frequency_hz, &r.power_mw[0].second, &r.power_mw[1].second};
  for (std::size_t c = 0; c < 3; ++c) {
    const double half_step = 0.5 * cfg->analogs[c].a * (1.0 + 1e-9);  // the writer rounds to the nearest step
    for (int i = 0; i < n; ++i) {
      INFO("channel " << c << " sample " << i);
      CHECK(std::abs((*got[c])[i] - in.rows[i * 4 + c + 1]) <= half_step);
    }
  }
  for (int i = 0; i < n; ++i) CHECK(r.t_s[i] == Approx(0.1 * i).margin(1e-6));  // times from the first sample
}

TEST_CASE("a channel that barely moves is scaled no finer than 0.1 uHz or 1 W, so it reads as flat", "[recordings]") {
  ComtradeInput in;
  in.station = "Kestrel Bay";
  in.columns = {"t_s", "north.f_hz", "g1.p_mw"};
  in.sample_hz = 10.0;
  for (int i = 0; i < 50; ++i)  // rounding noise in the last digits, as a settled run has
    in.rows.insert(in.rows.end(), {0.1 * i, 50.0 + 1e-13 * (i % 3), 120.0 - 1e-12 * (i % 2)});
  const ComtradeRecord rec = make_comtrade(in);
  REQUIRE(rec.error.empty());
  std::vector<Issue> issues;
  const auto cfg = parse_comtrade_cfg(rec.cfg, "flat.cfg", issues);
  REQUIRE(cfg);
  CHECK(cfg->analogs[0].a == 1e-7);
  CHECK(cfg->analogs[1].a == 1e-6);
  // Every count is 0: the values are the offset b.
  std::size_t at = 0;
  while (at < rec.dat.size()) {
    const std::size_t end = rec.dat.find("\r\n", at);
    const std::string line = rec.dat.substr(at, end - at);
    at = end + 2;
    CHECK(line.substr(line.find(',', line.find(',') + 1)) == ",0,0");
  }
}

TEST_CASE("a COMTRADE record longer than 71 minutes counts its timestamps within 32 bits", "[recordings]") {
  // 2^32 microseconds is 71.6 minutes: past it the writer raises the time multiplier (tens of
  // microseconds, then hundreds), so every timestamp fits a binary form's 32 bits and the 1999
  // revision's ten digits, and timestamp x multiplier still gives each sample's time.
  const auto dir = temp_folder("long");
  for (const double hours : {1.0, 3.0, 30.0}) {
    INFO(hours << " h");
    ComtradeInput in;
    in.station = "Kestrel Bay";
    in.columns = {"t_s", "north.f_hz", "g1.p_mw"};
    in.sample_hz = 0.1;
    const int n = static_cast<int>(hours * 360.0) + 1;
    for (int i = 0; i < n; ++i) in.rows.insert(in.rows.end(), {10.0 * i, 50.0 + 1e-3 * (i % 7), 100.0 + i % 3});
    const ComtradeRecord rec = make_comtrade(in);
    REQUIRE(rec.error.empty());
    std::vector<Issue> issues;
    const auto cfg = parse_comtrade_cfg(rec.cfg, "long.cfg", issues);
    REQUIRE(cfg);
    CHECK(cfg->timemult == (hours < 71.0 / 60.0 ? 1.0 : hours < 710.0 / 60.0 ? 10.0 : 100.0));
    // Each .dat line: sample number, timestamp, values.
    std::size_t at = 0;
    for (int i = 0; i < n; ++i) {
      const std::size_t end = rec.dat.find("\r\n", at);
      REQUIRE(end != std::string::npos);
      const std::string line = rec.dat.substr(at, end - at);
      at = end + 2;
      const std::size_t c1 = line.find(','), c2 = line.find(',', c1 + 1);
      const long long stamp = std::stoll(line.substr(c1 + 1, c2 - c1 - 1));
      REQUIRE(stamp < 4294967295LL);
      REQUIRE(static_cast<double>(stamp) * cfg->timemult * 1e-6 == Approx(10.0 * i).margin(cfg->timemult * 1e-6));
    }
    write(dir / "long.cfg", rec.cfg);
    write(dir / "long.dat", rec.dat);
    const Recording r = read_ok((dir / "long.cfg").string(), channels("north.f_hz", {"g1.p_mw"}));
    REQUIRE(r.t_s.size() == static_cast<std::size_t>(n));
    CHECK(r.t_s.back() == Approx(10.0 * (n - 1)));
  }
}

TEST_CASE("CSV: quoted names, comma or semicolon, per unit, several power columns", "[recordings]") {
  const auto dir = temp_folder("csv");
  std::vector<double> t, f, p1, p2;
  for (int i = 0; i < 20; ++i) {
    t.push_back(0.25 * i);
    f.push_back(50.0 - 0.002 * i * i);
    p1.push_back(120.0 + 1.5 * i);
    p2.push_back(80.0 - 0.75 * i);
  }
  SECTION("comma, quoted header with a quote inside, CRLF, trailing blank lines") {
    std::string s = "\"t_s\",G2 out,\"f, Hz\",\"G1 \"\"north\"\" P\"\r\n";
    for (int i = 0; i < 20; ++i)
      s += fmt_exact(t[i]) + "," + fmt_exact(p2[i]) + ",\"" + fmt_exact(f[i]) + "\"," + fmt_exact(p1[i]) + "\r\n";
    write(dir / "a.csv", s + "\r\n\r\n");
    const Recording r = read_ok((dir / "a.csv").string(), channels("f, Hz", {"G1 \"north\" P", "G2 out"}));
    CHECK(r.t_s == t);
    CHECK(r.frequency_hz == f);
    REQUIRE(r.power_mw.size() == 2);
    CHECK(r.power_mw[0].second == p1);
    CHECK(r.power_mw[1].second == p2);
  }
  SECTION("semicolon, per unit of 50 Hz and 250 MW, time column renamed") {
    std::string s = "time;f_pu;p1_pu;p2_pu\n";
    for (int i = 0; i < 20; ++i)
      s += fmt_exact(t[i]) + ";" + fmt_exact(f[i] / 50.0) + ";" + fmt_exact(p1[i] / 250.0) + ";" +
           fmt_exact(p2[i] / 250.0) + "\n";
    write(dir / "b.csv", s);
    RecordingOptions o = channels("f_pu", {"p1_pu", "p2_pu"});
    o.time_column = "time";
    o.units = RecordingUnits::per_unit;
    o.base_hz = 50.0;
    o.base_mw = 250.0;
    const Recording r = read_ok((dir / "b.csv").string(), o);
    for (int i = 0; i < 20; ++i) {
      CHECK(r.frequency_hz[i] == Approx(f[i]).epsilon(1e-14));
      CHECK(r.power_mw[0].second[i] == Approx(p1[i]).epsilon(1e-14));
      CHECK(r.power_mw[1].second[i] == Approx(p2[i]).epsilon(1e-14));
    }
  }
  SECTION("resampled onto a finer grid") {
    std::string s = "t_s,f,p\n";
    for (int i = 0; i < 20; ++i) s += fmt_exact(t[i]) + "," + fmt_exact(f[i]) + "," + fmt_exact(p1[i]) + "\n";
    write(dir / "c.csv", s);
    RecordingOptions o = channels("f", {"p"});
    o.resample_hz = 8.0;
    const Recording r = read_ok((dir / "c.csv").string(), o);
    REQUIRE(r.t_s.size() == static_cast<std::size_t>(std::lround(t.back() * 8.0)) + 1);
    for (std::size_t j = 0; j < r.t_s.size(); ++j) {
      const double s_t = static_cast<double>(j) / 8.0;
      const auto k = std::min<std::size_t>(static_cast<std::size_t>(s_t / 0.25), 18);
      const double w = (s_t - t[k]) / 0.25;
      CHECK(r.power_mw[0].second[j] == Approx(p1[k] + w * (p1[k + 1] - p1[k])));  // p1 is a line: exact
      CHECK(r.frequency_hz[j] == Approx(f[k] + w * (f[k + 1] - f[k])).epsilon(1e-12));
    }
  }
}
