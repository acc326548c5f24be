// Reading the records back: the run list and its filters, one run in full, each
// trainee's attempts, the CSV export. Every value from a caller is a bound
// parameter; the filters are checked by check_filter before they get here.
#include <algorithm>
#include <cctype>
#include <utility>
#include <vector>

#include "droopline/format.hpp"
#include "records_store.hpp"

namespace droopline::records {
namespace {

using json = nlohmann::ordered_json;

constexpr int kMaxRuns = 1000;  // a list, not a dump: the newest this many

// A run's columns, as run_row reads them.
constexpr const char* kRunSelect =
    "SELECT r.run_id, r.exercise, r.scenario, strftime('%Y-%m-%dT%H:%M:%SZ', "
    "r.started_at, 'unixepoch'), r.status, "
    "r.why, r.ended_s, r.journal_path, strftime('%Y-%m-%dT%H:%M:%SZ', "
    "r.ended_at, 'unixepoch') FROM runs r ";
// The filter (parameters ?1..?4) and the limit (?5), newest first. Exercise and trainee match
// any part of the name, whatever the case (ASCII letters; what an instructor types in a box).
constexpr const char* kFilter =
    "WHERE (?1 = '' OR instr(lower(r.exercise), lower(?1)) > 0) AND (?2 = '' OR date(r.started_at, "
    "'unixepoch') >= ?2) "
    "AND (?3 = '' OR date(r.started_at, 'unixepoch') <= ?3) "
    "AND (?4 = '' OR EXISTS (SELECT 1 FROM trainees t WHERE t.run_id = "
    "r.run_id AND instr(lower(t.name), lower(?4)) > 0)) "
    "ORDER BY r.started_at DESC, r.rowid DESC LIMIT ?5";

// The seats table keeps a seat's areas as one text, comma-separated (area ids
// have no commas).
std::vector<std::string> split_areas(const std::string& text) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start < text.size()) {
    const std::size_t comma = std::min(text.find(',', start), text.size());
    out.push_back(text.substr(start, comma - start));
    start = comma + 1;
  }
  return out;
}

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

json parsed_or_text(const std::string& text) {
  json j = json::parse(text, nullptr, false);
  return j.is_discarded() ? json(text) : j;
}

// A row of kRunSelect as JSON.
json run_row(const Stmt& s) {
  return json{{"run_id", s.text(0)},           {"exercise", s.text(1)},
              {"scenario", s.text(2)},         {"started", s.text(3)},
              {"status", s.text(4)},           {"why", s.text(5)},
              {"ended_s", opt(s.opt_real(6))}, {"ended", s.null(8) ? json(nullptr) : json(s.text(8))}};
}

// A run's seats: names, areas, trainees (in the order they joined) and the
// latest score.
bool seats_of(Db& db, const std::string& run_id, json& out, std::string& error) {
  out = json::array();
  Stmt s(db.get(),
         "SELECT s.seat, s.name, s.areas, sc.score, sc.final, "
         "sc.objectives, sc.t_s FROM seats s "
         "LEFT JOIN scores sc ON sc.run_id = s.run_id AND sc.seat = "
         "s.seat WHERE s.run_id = ?1 ORDER BY s.rowid");
  s.bind(1, run_id);
  while (s.row()) {
    json areas = json::array();
    for (const std::string& a : split_areas(s.text(2))) areas.push_back(a);
    out.push_back({{"seat", s.text(0)},
                   {"name", s.text(1)},
                   {"areas", areas},
                   {"trainees", json::array()},
                   {"score", opt(s.opt_real(3))},
                   {"final", !s.null(4) && s.integer(4) != 0},
                   {"scored_s", opt(s.opt_real(6))},
                   {"objectives", s.null(5) ? json::array() : parsed_or_text(s.text(5))}});
  }
  if (s.failed()) {
    error = s.error();
    return false;
  }
  Stmt t(db.get(),
         "SELECT seat, name FROM trainees WHERE run_id = ?1 ORDER BY "
         "joined_at, id");
  t.bind(1, run_id);
  while (t.row())
    for (json& seat : out)
      if (seat["seat"] == t.text(0)) {
        json& names = seat["trainees"];
        if (std::find(names.begin(), names.end(), json(t.text(1))) == names.end()) names.push_back(t.text(1));
      }
  if (t.failed()) error = t.error();
  return !t.failed();
}

// The filtered runs with their seats.
bool filtered_runs(Db& db, const RunFilter& f, json& out, std::string& error) {
  out = json::array();
  Stmt s(db.get(), std::string(kRunSelect) + kFilter);
  s.bind(1, f.exercise).bind(2, f.from).bind(3, f.to).bind(4, f.trainee).bind(5, static_cast<long long>(kMaxRuns));
  while (s.row()) out.push_back(run_row(s));
  if (s.failed()) {
    error = s.error();
    return false;
  }
  for (json& run : out)
    if (!seats_of(db, run["run_id"].get<std::string>(), run["seats"], error)) return false;
  return true;
}

bool date_ok(const std::string& d) {
  if (d.size() != 10 || d[4] != '-' || d[7] != '-') return false;
  for (std::size_t i : {0, 1, 2, 3, 5, 6, 8, 9})
    if (!std::isdigit(static_cast<unsigned char>(d[i]))) return false;
  const int month = std::stoi(d.substr(5, 2)), day = std::stoi(d.substr(8, 2));
  return month >= 1 && month <= 12 && day >= 1 && day <= 31;
}

}  // namespace

std::string check_filter(const RunFilter& f) {
  for (const auto& [name, value] : {std::pair{"from", &f.from}, std::pair{"to", &f.to}})
    if (!value->empty() && !date_ok(*value)) return std::string(name) + ": a date YYYY-MM-DD (UTC) is expected";
  for (const auto& [name, value] : {std::pair{"trainee", &f.trainee}, std::pair{"exercise", &f.exercise}})
    if (value->size() > 200) return std::string(name) + ": at most 200 bytes";
  return {};
}

bool valid_run_id(std::string_view id) {
  return id.size() == 32 &&
         std::all_of(id.begin(), id.end(), [](char c) { return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'); });
}

std::string csv_cell(std::string_view text) {
  std::string cell(text);
  // A spreadsheet runs a cell starting with these as a formula: an apostrophe
  // makes it text.
  if (!cell.empty() &&
      (cell[0] == '=' || cell[0] == '+' || cell[0] == '-' || cell[0] == '@' || cell[0] == '\t' || cell[0] == '\r'))
    cell.insert(0, 1, '\'');
  if (cell.find_first_of(",\"\r\n") == std::string::npos) return cell;
  std::string quoted = "\"";
  for (char c : cell) quoted += c == '"' ? std::string("\"\"") : std::string(1, c);
  return quoted + "\"";
}

bool RecordsStore::reader(Db& db, std::string& error) const {
  std::string why;
  if (db.open(path_, false, true, why)) return true;
  error = "records: cannot read " + path_ + ": " + why;
  return false;
}

std::optional<json> RecordsStore::runs(const RunFilter& filter, std::string& error) const {
  Db db;
  json out;
  if (!reader(db, error) || !filtered_runs(db, filter, out, error)) return std::nullopt;
  return out;
}

std::optional<json> RecordsStore::run(const std::string& run_id, std::string& error) const {
  Db db;
  if (!reader(db, error)) return std::nullopt;
  Stmt s(db.get(), std::string(kRunSelect) + "WHERE r.run_id = ?1");
  s.bind(1, run_id);
  if (!s.row()) {
    error = s.error();
    return std::nullopt;
  }
  json out = run_row(s);
  out["journal_path"] = s.text(7);
  bool ok = seats_of(db, run_id, out["seats"], error);
  auto rows = [&](const char* key, std::string_view sql, auto&& row) {
    json list = json::array();
    Stmt q(db.get(), sql);
    q.bind(1, run_id);
    while (ok && q.row()) list.push_back(row(q));
    if (q.failed()) ok = false, error = q.error();
    out[key] = std::move(list);
  };
  rows("trainees",
       "SELECT seat, name, strftime('%Y-%m-%dT%H:%M:%SZ', joined_at, "
       "'unixepoch'), joined_s FROM trainees "
       "WHERE run_id = ?1 ORDER BY joined_at, id",
       [](Stmt& q) {
         return json{{"seat", q.text(0)}, {"name", q.text(1)}, {"joined", q.text(2)}, {"t_s", opt(q.opt_real(3))}};
       });
  rows("actions",
       "SELECT t_s, by, commands FROM actions WHERE run_id = ?1 ORDER BY t_s, "
       "id",
       [](Stmt& q) {
         return json{{"t_s", q.real(0)}, {"by", q.text(1)}, {"commands", parsed_or_text(q.text(2))}};
       });
  rows("alarms", "SELECT latest FROM alarms WHERE run_id = ?1 ORDER BY raised_s, alarm",
       [](Stmt& q) { return parsed_or_text(q.text(0)); });
  rows("notes",
       "SELECT t_s, by, text, strftime('%Y-%m-%dT%H:%M:%SZ', written_at, "
       "'unixepoch') FROM notes "
       "WHERE run_id = ?1 ORDER BY written_at, id",
       [](Stmt& q) {
         return json{{"t_s", opt(q.opt_real(0))}, {"by", q.text(1)}, {"text", q.text(2)}, {"written", q.text(3)}};
       });
  if (!ok) return std::nullopt;
  return out;
}

std::optional<json> RecordsStore::trainees(std::string& error) const {
  Db db;
  if (!reader(db, error)) return std::nullopt;
  Stmt s(db.get(),
         "SELECT t.name, r.exercise, r.run_id, strftime('%Y-%m-%dT%H:%M:%SZ', "
         "r.started_at, 'unixepoch'), t.seat, "
         "sc.score, sc.final, r.status FROM (SELECT DISTINCT run_id, seat, "
         "name FROM trainees) t "
         "JOIN runs r ON r.run_id = t.run_id LEFT JOIN scores sc ON sc.run_id "
         "= t.run_id AND sc.seat = t.seat "
         "WHERE t.name <> '(removed)' ORDER BY t.name, r.started_at, r.rowid");
  json out = json::array();
  while (s.row()) {
    if (out.empty() || out.back()["name"] != s.text(0))
      out.push_back({{"name", s.text(0)}, {"attempts", json::array()}});
    out.back()["attempts"].push_back({{"exercise", s.text(1)},
                                      {"run_id", s.text(2)},
                                      {"started", s.text(3)},
                                      {"seat", s.text(4)},
                                      {"score", opt(s.opt_real(5))},
                                      {"final", !s.null(6) && s.integer(6) != 0},
                                      {"status", s.text(7)}});
  }
  if (s.failed()) {
    error = s.error();
    return std::nullopt;
  }
  return out;
}

namespace {
// A score out of 100 to one decimal, as the debrief and the records page show it (the stored value
// keeps every digit); empty when there is none.
std::string score_cell(const json& score) { return score.is_number() ? fmt_fixed(score.get<double>(), 1) : ""; }
}  // namespace

std::optional<std::string> RecordsStore::export_csv(const RunFilter& filter, std::string& error) const {
  Db db;
  json list;
  if (!reader(db, error) || !filtered_runs(db, filter, list, error)) return std::nullopt;
  std::vector<std::string> objectives;  // every objective's id, in the order first met
  for (const json& run : list)
    for (const json& seat : run["seats"])
      for (const json& o : seat["objectives"])
        if (o.is_object() && o.contains("objective") && o["objective"].is_string() &&
            std::find(objectives.begin(), objectives.end(), o["objective"].get<std::string>()) == objectives.end())
          objectives.push_back(o["objective"].get<std::string>());
  std::string out = "date,exercise,run_id,status,seat,trainee,score";
  for (const std::string& o : objectives) out += "," + csv_cell(o);
  out += "\r\n";
  // With a trainee asked for, only the seats that trainee sat at (the run's other seats are others').
  auto lower = [](std::string s) {
    for (char& ch : s) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
    return s;
  };
  const std::string wanted = lower(filter.trainee);
  for (const json& run : list)
    for (const json& seat : run["seats"]) {
      std::string names;
      bool theirs = wanted.empty();
      for (const json& n : seat["trainees"]) {
        names += (names.empty() ? "" : "; ") + n.get<std::string>();
        theirs = theirs || lower(n.get<std::string>()).find(wanted) != std::string::npos;
      }
      if (!theirs) continue;
      out += csv_cell(run["started"].get<std::string>().substr(0, 10)) + "," +
             csv_cell(run["exercise"].get<std::string>()) + "," + run["run_id"].get<std::string>() + "," +
             run["status"].get<std::string>() + "," + csv_cell(seat["seat"].get<std::string>()) + "," +
             csv_cell(names) + "," + score_cell(seat["score"]);
      for (const std::string& id : objectives) {
        out += ",";
        for (const json& o : seat["objectives"])
          if (o.is_object() && o.value("objective", "") == id && o.contains("score")) out += score_cell(o["score"]);
      }
      out += "\r\n";
    }
  return out;
}

}  // namespace droopline::records
