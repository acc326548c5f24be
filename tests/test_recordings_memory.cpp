// Recordings read from memory (as the service receives them) give exactly what the file readers
// give for the same bytes, and their errors name the place with the name given.
#include "droopline/fit.hpp"
#include "droopline/playback.hpp"
#include "droopline/scenario_io.hpp"
#include "recordings_support.hpp"

using namespace droopline;
using namespace droopline::study;
using namespace rec_test;

namespace {

const std::string kShipped = std::string(DROOPLINE_SOURCE_DIR) + "/scenarios/validation/";

std::string file_text(const std::string& path) {
  std::vector<Issue> issues;
  auto text = read_text_file(path, issues);
  REQUIRE(text);
  return *text;
}

// The options `droopline fit --unit QH1` uses on the shipped example.
RecordingOptions qh1() {
  const LoadResult plant = load_scenario_file(kShipped + "plant.json");
  REQUIRE(plant.system);
  return default_columns(plant.system->def(), {"QH1"}, RecordingOptions{});
}

// Every series, name, source and warning equal, value for value.
void same(const Recording& a, const Recording& b) {
  CHECK(a.t_s == b.t_s);
  CHECK(a.frequency_hz == b.frequency_hz);
  REQUIRE(a.power_mw.size() == b.power_mw.size());
  for (std::size_t k = 0; k < a.power_mw.size(); ++k) {
    CHECK(a.power_mw[k].first == b.power_mw[k].first);
    CHECK(a.power_mw[k].second == b.power_mw[k].second);
  }
  CHECK(a.source == b.source);
  CHECK(a.warnings == b.warnings);
}

std::string issues_text(const std::vector<Issue>& issues) {
  std::string s;
  for (const Issue& i : issues) s += i.text() + "\n";
  return s;
}

}  // namespace

TEST_CASE("the shipped CSV recording reads the same from its text as from its file", "[recordings]") {
  const std::string path = kShipped + "recorded_event.csv";
  const RecordingOptions o = qh1();
  CHECK(o.frequency_column == "quarnholt.f_hz");
  REQUIRE(o.power_columns == std::vector<std::string>{"QH1.p_mw"});
  std::vector<Issue> a_issues, b_issues;
  const auto a = read_recording(path, o, a_issues);
  const auto b = read_csv_recording_text(file_text(path), path, o, b_issues);
  REQUIRE(a);
  REQUIRE(b);
  CHECK(a->t_s.size() == 6001);  // ten minutes at 10 samples a second (README, Playback)
  same(*a, *b);
}

TEST_CASE("the shipped COMTRADE record reads the same from its bytes as from its files", "[recordings]") {
  const std::string cfg = kShipped + "recorded_event.cfg";
  const RecordingOptions o = qh1();
  std::vector<Issue> a_issues, b_issues;
  const auto a = read_recording(cfg, o, a_issues);
  const auto b =
      read_comtrade_recording_data(file_text(cfg), file_text(kShipped + "recorded_event.dat"), cfg, o, b_issues);
  REQUIRE(a);
  REQUIRE(b);
  CHECK(a->t_s.size() == 6001);
  same(*a, *b);
}

TEST_CASE("the COMTRADE copy's times are the CSV's to the bit (samples over rate, not a running sum)", "[recordings]") {
  const RecordingOptions o = qh1();
  std::vector<Issue> issues;
  const auto csv = read_recording(kShipped + "recorded_event.csv", o, issues);
  const auto cfg = read_recording(kShipped + "recorded_event.cfg", o, issues);
  REQUIRE(csv);
  REQUIRE(cfg);
  // 6,000 sums of 0.1 s come to 600.00000000007 s: the last sample then fell past a 600 s run.
  CHECK(cfg->t_s.back() == 600.0);
  CHECK(cfg->t_s == csv->t_s);
}

TEST_CASE("a BINARY32 record reads the same from bytes as from files", "[recordings]") {
  const auto dir = temp_folder("memory-binary32");
  Layout l;
  l.revision = "2013";
  l.file_type = "BINARY32";
  l.analogs = {{"F", "Hz", 1e-6, 50.0}, {"G1.P", "MW", 0.001, 300.0}};
  l.rates = {{10.0, 40}};
  std::vector<Row> rows;
  for (int i = 0; i < 40; ++i) rows.push_back({0u, {-120000.0 + 3000 * i, 70000.0 - 1500 * i}, {}});
  const std::string cfg = write_record(dir, "b32", l, rows);
  RecordingOptions o;
  o.frequency_column = "F";
  o.power_columns = {"G1.P"};
  std::vector<Issue> a_issues, b_issues;
  const auto a = read_recording(cfg, o, a_issues);
  const auto b = read_comtrade_recording_data(cfg_of(l), binary_of("BINARY32", rows), cfg, o, b_issues);
  REQUIRE(a);
  REQUIRE(b);
  same(*a, *b);
}

TEST_CASE("errors from memory name the place with the name given", "[recordings]") {
  RecordingOptions o;
  o.frequency_column = "f";
  o.power_columns = {"p"};
  std::vector<Issue> issues;
  CHECK_FALSE(read_csv_recording_text("t_s,f,p\n0,50,1\n0.1,5O,1\n", "posted.csv", o, issues));
  INFO(issues_text(issues));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "posted.csv line 3 column \"f\": \"5O\" is not a finite number");

  Layout l;
  l.file_type = "BINARY";
  l.analogs = {{"f", "Hz", 0.001, 50.0}, {"p", "MW", 0.05, 10.0}};
  l.rates = {{10.0, 4}};
  std::vector<Row> rows(4, Row{0u, {1.0, 2.0}, {}});
  std::string dat = binary_of("BINARY", rows);
  dat.pop_back();  // a partial last record
  issues.clear();
  CHECK_FALSE(read_comtrade_recording_data(cfg_of(l), dat, "posted.cfg", o, issues));
  REQUIRE(issues.size() == 1);
  // Records of 8 + 2 x 2 bytes: the partial one starts at byte 36.
  CHECK(issues[0].path == "posted.dat byte 36");

  issues.clear();
  std::string cfg = cfg_of(l);
  cfg.replace(cfg.find("BINARY"), 6, "PACKED");
  CHECK_FALSE(read_comtrade_recording_data(cfg, binary_of("BINARY", rows), "posted.cfg", o, issues));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].path.rfind("posted.cfg line ", 0) == 0);
  CHECK(issues[0].message.find("unknown file type \"PACKED\"") != std::string::npos);
}

TEST_CASE("a recording path that is a device or a folder is refused, not read forever", "[recordings]") {
  // /dev/zero never ends: read as a stream it would take all of memory before any error.
  for (const std::string& path : std::vector<std::string>{"/dev/zero", "/dev/null", DROOPLINE_SOURCE_DIR}) {
    for (const std::string ext : {".csv", ".cfg"}) {
      std::vector<Issue> issues;
      const auto r =
          ext == ".csv" ? read_csv_recording(path, qh1(), issues) : read_comtrade_recording(path, qh1(), issues);
      CHECK_FALSE(r);
      INFO(issues_text(issues));
      CHECK(issues_text(issues).find("\"" + path + "\" is not a readable file") != std::string::npos);
    }
  }
}
