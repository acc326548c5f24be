// Bad recordings: each is refused, nothing is returned, and the message names the file and the
// line, column or byte where it went wrong (computed here from the layout written).
#include <functional>

#include "recordings_support.hpp"

using namespace droopline;
using namespace droopline::study;
using namespace rec_test;

namespace {

using Edit = std::function<void(std::string&)>;

std::vector<Row> rows_of(int n, bool stamps = false) {
  std::vector<Row> rows;
  for (int i = 0; i < n; ++i)
    rows.push_back({std::uint32_t(stamps ? 100000 * i : 0), {1000.0 + i, 2000.0 + i, 3000.0 + i}, {}});
  return rows;
}

Layout base(const std::string& file_type = "ASCII", const std::string& revision = "1999") {
  Layout l;
  l.revision = revision;
  l.file_type = file_type;
  l.analogs = {{"F", "Hz", 0.001, 50.0}, {"G1.P", "MW", 0.05, 100.0}, {"G2.P", "MW", 0.05, 80.0}};
  l.rates = {{10.0, 10}};
  return l;
}

void replace_once(std::string& s, const std::string& from, const std::string& to) {
  const auto at = s.find(from);
  REQUIRE(at != std::string::npos);
  s.replace(at, from.size(), to);
}

// Writes bad.cfg and bad.dat from a layout and rows, each text edited afterwards; the .cfg's path.
std::function<std::string(const fs::path&)> record(Layout l, std::vector<Row> rows, Edit cfg_edit = {},
                                                   Edit dat_edit = {}) {
  return [=](const fs::path& dir) {
    std::string cfg = cfg_of(l), dat = l.file_type == "ASCII" ? ascii_of(rows) : binary_of(l.file_type, rows);
    if (cfg_edit) cfg_edit(cfg);
    if (dat_edit) dat_edit(dat);
    write(dir / "bad.cfg", cfg);
    write(dir / "bad.dat", dat);
    return (dir / "bad.cfg").string();
  };
}

std::function<std::string(const fs::path&)> csv(const std::string& text, const std::string& name = "bad.csv") {
  return [=](const fs::path& dir) {
    write(dir / name, text);
    return (dir / name).string();
  };
}

RecordingOptions opts(const std::string& f, std::vector<std::string> p) {
  RecordingOptions o;
  o.frequency_column = f;
  o.power_columns = std::move(p);
  return o;
}

struct Bad {
  std::string name;
  std::function<std::string(const fs::path&)> make;
  std::vector<std::string> expect;  // each must appear in one message
  RecordingOptions options = opts("F", {"G1.P"});
};

// A BINARY record's length: 8 bytes of sample number and timestamp, 2 per analog value, 2 per 16
// digital states.
constexpr std::size_t kRecord = 8 + 3 * 2;

Layout stamped(const std::string& file_type) {
  Layout l = base(file_type);
  l.rates = {{0.0, 10}};
  return l;
}

std::vector<Bad> table() {
  std::vector<Row> backwards = rows_of(10, true);
  backwards[4].stamp = 250000;  // after 300000 at sample 4
  std::vector<Row> no_stamp = rows_of(10, true);
  no_stamp[2].stamp.reset();
  const std::string full = binary_of("BINARY", rows_of(10));
  Layout secondary = base();
  secondary.analogs[1] = {"G1.P", "MW", 0.05, 0.0, 0.0, 5.0, "S"};
  Layout two_rates = base();
  two_rates.rates = {{10.0, 10}, {5.0, 8}};
  Layout unknown_ft = base("BINARY64"), float_1999 = base("FLOAT32"), rev2005 = base(), huge_mult = base();
  huge_mult.timemult = 1e308;  // finite, and every timestamp times it is infinite
  rev2005.revision = "2005";
  RecordingOptions fine_grid = opts("f", {"p1"});
  fine_grid.resample_hz = 1e6;
  std::vector<Row> no_values = rows_of(10);
  for (Row& r : no_values) r.x[1].reset();
  RecordingOptions per_unit = opts("f", {"p1"});
  per_unit.units = RecordingUnits::per_unit;
  per_unit.base_hz = 50.0;
  return {
      {"truncated binary data (whole records)",
       record(base("BINARY"), rows_of(7)),
       {"bad.dat byte " + std::to_string(7 * kRecord), "ends after 7 of the 10 samples"}},
      {"binary length not a multiple of the record size",
       record(base("BINARY"), rows_of(10), {}, [](std::string& d) { d.resize(d.size() - 5); }),
       {"bad.dat byte " + std::to_string(full.size() - 5 - (full.size() - 5) % kRecord),
        "partial record of " + std::to_string((full.size() - 5) % kRecord) + " bytes"}},
      {"binary data longer than the .cfg says",
       record(base("BINARY"), rows_of(11)),
       {"bad.dat byte " + std::to_string(10 * kRecord), "more data than the 10 samples"}},
      {"wrong channel count",
       record(base(), rows_of(10), [](std::string& c) { replace_once(c, "3,3A,0D", "4,3A,0D"); }),
       {"bad.cfg line 2", "TT 4 is not 3A + 0D"}},
      {"bad revision year", record(rev2005, rows_of(10)), {"bad.cfg line 1", "revision year \"2005\""}},
      {"no revision year (1991)",
       record(base(), rows_of(10), [](std::string& c) { replace_once(c, ",1999\r\n", "\r\n"); }),
       {"bad.cfg line 1", "no revision year"}},
      {"non-numeric scaling",
       record(base(), rows_of(10), [](std::string& c) { replace_once(c, ",0.05,100,", ",0.05x,100,"); }),
       {"bad.cfg line 4", "multiplier a \"0.05x\" is not a number"}},
      {"unknown file type", record(unknown_ft, rows_of(10)), {"bad.cfg line 11", "unknown file type \"BINARY64\""}},
      {"absurd time multiplier", record(huge_mult, rows_of(10, true)), {"bad.cfg line 12", "must be at most 1e6"}},
      {"FLOAT32 in a 1999 record", record(float_1999, rows_of(10)), {"bad.cfg line 11", "needs revision 2013"}},
      {"PS flag neither P nor S",
       record(base(), rows_of(10), [](std::string& c) { replace_once(c, ",1,1,P\r\n", ",1,1,Q\r\n"); }),
       {"bad.cfg line 3", "PS flag \"Q\""}},
      {"secondary values without a ratio", record(secondary, rows_of(10)), {"bad.cfg line 4", "primary and secondary"}},
      {"endsamp going back", record(two_rates, rows_of(10)), {"bad.cfg line 9", "endsamp 8 does not come after"}},
      {"2013 without its time code lines",
       record(base("ASCII", "2013"), rows_of(10), [](std::string& c) { c.resize(c.rfind("+1h,+1h")); }),
       {"bad.cfg line 13", "time code"}},
      {"empty .cfg",
       record(base(), rows_of(10), [](std::string& c) { c.clear(); }),
       {"bad.cfg line 1", "ends where the station line"}},
      {"ASCII sample count short of the .cfg's",
       record(base(), rows_of(9)),
       {"bad.dat line 10", "ends after 9 of the 10 samples"}},
      {"ASCII sample count beyond the .cfg's", record(base(), rows_of(11)), {"bad.dat line 11", "more data"}},
      {"ASCII wrong field count",
       record(base(), rows_of(10), {}, [](std::string& d) { replace_once(d, "2,0,1001,", "2,0,"); }),
       {"bad.dat line 2", "4 fields, expected 5"}},
      {"ASCII non-numeric value",
       record(base(), rows_of(10), {}, [](std::string& d) { replace_once(d, ",1002,", ",10o2,"); }),
       {"bad.dat line 3", "channel \"F\" value \"10o2\" is not a number"}},
      {"ASCII time going backwards",
       record(stamped("ASCII"), backwards),
       {"bad.dat line 5", "timestamp 250000 does not come after the previous 300000"}},
      {"binary time going backwards",
       record(stamped("BINARY"), backwards),
       {"bad.dat byte " + std::to_string(4 * kRecord + 4), "does not come after"}},
      {"binary timestamp missing with no rate",
       record(stamped("BINARY"), no_stamp),
       {"bad.dat byte " + std::to_string(2 * kRecord + 4), "missing timestamp"}},
      {"channel not found",
       record(base(), rows_of(10)),
       {"bad.cfg", "no channel \"G9.P\" (channels: F, G1.P, G2.P)"},
       opts("F", {"G9.P"})},
      {"missing .dat",
       [](const fs::path& dir) {
         write(dir / "bad.cfg", cfg_of(base()));
         return (dir / "bad.cfg").string();
       },
       {"no data file beside it"}},
      {"CSV missing column",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,1\n"),
       {"bad.csv line 1", "no column \"p2\" (columns: t_s, f_hz, p1)"},
       opts("f_hz", {"p1", "p2"})},
      {"CSV NaN",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,1\n2,nan,1\n"),
       {"bad.csv line 4 column \"f_hz\"", "\"nan\" is not a finite"},
       opts("f_hz", {"p1"})},
      {"CSV infinity",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,inf\n"),
       {"bad.csv line 3 column \"p1\"", "not a finite number"},
       opts("f_hz", {"p1"})},
      {"CSV time going backwards",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,1\n2,50,1\n1.5,50,1\n"),
       {"bad.csv line 5 column \"t_s\"", "time 1.5 s does not come after the previous 2 s"},
       opts("f_hz", {"p1"})},
      {"CSV missing cell",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,\n"),
       {"bad.csv line 3 column \"p1\"", "missing value"},
       opts("f_hz", {"p1"})},
      {"CSV row short of a field",
       csv("t_s,f_hz,p1\n0,50,1\n1,50\n"),
       {"bad.csv line 3", "2 fields where the header has 3"},
       opts("f_hz", {"p1"})},
      {"CSV value split by a thousands separator",
       csv("t_s,f_hz,p1\n0,50,1\n1,50,1,200.5\n"),
       {"bad.csv line 3", "4 fields where the header has 3 (a comma inside a number"},
       opts("f_hz", {"p1"})},
      {"CSV empty file", csv(""), {"bad.csv line 1", "empty"}, opts("f_hz", {"p1"})},
      {"CSV decimal comma",
       csv("t_s;f;p1\n0;50;1\n1;49,9;1\n"),
       {"bad.csv line 3 column \"f\"", "decimal commas"},
       opts("f", {"p1"})},
      {"CSV blank line inside",
       csv("t_s,f,p1\n0,50,1\n\n1,50,1\n"),
       {"bad.csv line 3", "blank line"},
       opts("f", {"p1"})},
      {"CSV per unit without a power base", csv("t_s,f,p1\n0,1,1\n1,1,1\n"), {"base_mw", "power base"}, per_unit},
      {"CSV resampled onto a grid too large to hold",
       csv("t_s,f,p1\n0,50,1\n100000,50,1\n"),
       {"bad.csv", "would make 1e+11 samples"},
       fine_grid},
      {"a channel with no value at all",
       record(base(), no_values),
       {"bad.dat", "channel \"G1.P\" has no value at all"}},
      {"unknown extension",
       csv("t_s,f,p1\n0,1,1\n1,1,1\n", "bad.txt"),
       {"must end in .csv or .cfg"},
       opts("f", {"p1"})},
  };
}

}  // namespace

TEST_CASE("bad recordings are refused with the place of the fault", "[recordings]") {
  const auto cases = table();
  REQUIRE(cases.size() >= 15);
  for (const Bad& b : cases) {
    DYNAMIC_SECTION(b.name) {
      const auto dir = temp_folder("bad");
      const std::string path = b.make(dir);
      std::vector<Issue> issues;
      const auto r = read_recording(path, b.options, issues);
      std::string msgs;
      for (const Issue& i : issues) msgs += i.text() + "\n";
      INFO(msgs);
      CHECK_FALSE(r);
      CHECK(has_errors(issues));
      for (const std::string& part : b.expect) CHECK(msgs.find(part) != std::string::npos);
    }
  }
}

TEST_CASE("a good record passes the same checks the bad ones fail", "[recordings]") {
  // The table's base record, unedited, reads: the faults above are the edits, not the base.
  for (const std::string ft : {"ASCII", "BINARY"}) {
    const auto dir = temp_folder("base-" + ft);
    const std::string path = record(base(ft), rows_of(10))(dir);
    std::vector<Issue> issues;
    const auto r = read_recording(path, opts("F", {"G1.P", "G2.P"}), issues);
    CHECK(issues.empty());
    REQUIRE(r);
    CHECK(r->frequency_hz[9] == Approx(0.001 * 1009.0 + 50.0));
  }
}
