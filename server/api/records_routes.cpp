// The training records routes: past runs with filters, one run in full, its
// debrief, notes after the session, each trainee's attempts, the CSV export,
// removing a trainee's name, the store's health. All of them are the
// instructor's: the records hold trainees' names and scores. Ids and query
// values are checked here (hex, length, date form) before the store binds them
// to SQL.
#include <filesystem>
#include <nlohmann/json.hpp>

#include "api.hpp"
#include "droopline/json_input.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;
using records::RecordsStore;

constexpr const char* kRecords =
    "training records are for the instructor "
    "(they hold trainees' names and scores)";
constexpr std::size_t kMaxNameBytes = 200;
// The query parameters of the filtered reads (records::RunFilter).
const std::vector<std::string> kFilters = {"trainee", "exercise", "from", "to"};

// The store, or a 503 answered.
RecordsStore* store_of(Services& s, Call& c) {
  if (!s.records)
    c.error(503,
            "no training records are kept: start the service with "
            "--records FILE (or with --journal: they go beside it)");
  return s.records.get();
}

// The filters of the query, or a 400 answered.
std::optional<records::RunFilter> filter_of(Call& c) {
  records::RunFilter f{c.target.get("trainee"), c.target.get("exercise"), c.target.get("from"), c.target.get("to")};
  if (std::string bad = records::check_filter(f); !bad.empty()) {
    c.error(400, "query parameter " + bad);
    return std::nullopt;
  }
  return f;
}

// The route's run id, or a 400 answered.
std::optional<std::string> run_id_of(Call& c) {
  const std::string& id = c.params.at(0);
  if (records::valid_run_id(id)) return id;
  c.error(400, "run id " + quote_cut(id) + ": 32 lower-case hex digits expected");
  return std::nullopt;
}

// One run of the records, or 404 (unknown) or 503 (the file unreadable)
// answered.
std::optional<json> run_of(RecordsStore& store, Call& c, const std::string& id) {
  std::string error;
  auto run = store.run(id, error);
  if (!run) c.error(error.empty() ? 404 : 503, error.empty() ? "no run " + id + " in the training records" : error);
  return run;
}

void status(Services& s, Call& c) {
  if (!s.records)
    return c.reply(200, json{{"file", nullptr}, {"ok", false}, {"error", "no training records are kept"}}.dump());
  const records::Status st = s.records->status();
  c.reply(200, json{{"file", st.file}, {"ok", st.ok}, {"error", st.ok ? json(nullptr) : json(st.error)}}.dump());
}

// Answers a read of the store (with the query's filters when `filtered`): 503 without a store or
// when its file cannot be read, else the reply `read` makes of what it read.
template <typename Read>
void answer_read(Services& s, Call& c, bool filtered, Read read) {
  RecordsStore* store = store_of(s, c);
  auto filter = !store ? std::nullopt : filtered ? filter_of(c) : std::optional(records::RunFilter{});
  if (!filter) return;
  std::string error;
  std::optional<Reply> reply = read(*store, *filter, error);
  if (!reply) return c.error(503, error);
  c.respond(std::move(*reply));
}

// A JSON reply {key: list}.
Reply list_reply(const char* key, json list) {
  return Reply{200,
               "application/json",
               json{{key, std::move(list)}}.dump(-1, ' ', false, json::error_handler_t::replace),
               {},
               {}};
}

void list_runs(Services& s, Call& c) {
  answer_read(s, c, true, [](RecordsStore& store, const records::RunFilter& f, std::string& error) {
    auto runs = store.runs(f, error);
    return runs ? std::optional(list_reply("runs", std::move(*runs))) : std::nullopt;
  });
}

void get_run(Services& s, Call& c) {
  RecordsStore* store = store_of(s, c);
  auto id = store ? run_id_of(c) : std::nullopt;
  if (!id) return;
  if (auto run = run_of(*store, c, *id)) c.reply(200, run->dump(-1, ' ', false, json::error_handler_t::replace));
}

void debrief(Services& s, Call& c) {
  RecordsStore* store = store_of(s, c);
  auto id = store ? run_id_of(c) : std::nullopt;
  if (!id) return;
  auto run = run_of(*store, c, *id);
  if (!run) return;
  const std::string journal = (*run)["journal_path"].get<std::string>();
  std::error_code ec;
  if (journal.empty() || !std::filesystem::is_regular_file(journal, ec))
    return c.error(410, "the journal of run " + *id + " is gone" +
                            (journal.empty() ? std::string(" (it ran without one)") : " (" + journal + ")") +
                            ": its debrief cannot be built");
  // The trainees as the records know them (a removed name stays removed), and
  // the notes written after the session: those during it are in the journal,
  // which the debrief reads itself.
  study::DebriefExtras extras;
  for (const json& t : (*run)["trainees"]) extras.trainees.emplace_back(t["seat"], t["name"]);
  for (const json& n : (*run)["notes"])
    if (n["t_s"].is_null()) extras.notes.push_back({std::nullopt, n["by"], n["text"]});
  respond_with_debrief(s, c, journal, *id, std::move(extras));
}

void post_note(Services& s, Call& c) {
  RecordsStore* store = store_of(s, c);
  auto id = store ? run_id_of(c) : std::nullopt;
  if (!id) return;
  auto note = typed_body(c, kNoteText);
  if (!note) return;
  const std::string text = std::move(*note);
  store->add_note(*id, "instructor", text, [respond = c.respond, id = *id, text](std::string error) {
    if (error.empty())
      return respond(
          Reply{201, "application/json", json{{"run_id", id}, {"by", "instructor"}, {"text", text}}.dump(), {}, {}});
    respond(Reply{error == "unknown run" ? 404 : 503,
                  "application/json",
                  error_json(error == "unknown run" ? "no run " + id + " in the training records" : error),
                  {},
                  {}});
  });
}

void get_trainees(Services& s, Call& c) {
  answer_read(s, c, false, [](RecordsStore& store, const records::RunFilter&, std::string& error) {
    auto list = store.trainees(error);
    return list ? std::optional(list_reply("trainees", std::move(*list))) : std::nullopt;
  });
}

void export_csv(Services& s, Call& c) {
  answer_read(s, c, true, [](RecordsStore& store, const records::RunFilter& f, std::string& error) {
    auto csv = store.export_csv(f, error);
    if (!csv) return std::optional<Reply>();
    return std::optional(Reply{200,
                               "text/csv; charset=utf-8",
                               std::move(*csv),
                               {{"Content-Disposition", "attachment; filename=\"droopline-records.csv\""}},
                               {}});
  });
}

void delete_trainee(Services& s, Call& c) {
  RecordsStore* store = store_of(s, c);
  if (!store) return;
  const std::string& name = c.params.at(0);
  if (name.size() > kMaxNameBytes || name == "(removed)" ||
      std::any_of(name.begin(), name.end(), [](char ch) { return static_cast<unsigned char>(ch) < 0x20; }))
    return c.error(400, "trainee name " + quote_cut(name) + ": at most " + std::to_string(kMaxNameBytes) +
                            " bytes without control characters");
  store->delete_trainee(name, [respond = c.respond, name](long long changed, std::string error) {
    if (!error.empty()) return respond(Reply{503, "application/json", error_json(error), {}, {}});
    respond(Reply{200,
                  "application/json",
                  json{{"name", name}, {"replaced_with", "(removed)"}, {"changed", changed}}.dump(
                      -1, ' ', false, json::error_handler_t::replace),
                  {},
                  {}});
  });
}

}  // namespace

void add_records_routes(std::vector<Route>& routes) {
  const Role instructor = Role::instructor;
  routes.insert(routes.end(),
                {
                    {Verb::get, "/api/v1/records/status", instructor, kRecords, status},
                    {Verb::get, "/api/v1/records/runs", instructor, kRecords, list_runs, kFilters},
                    {Verb::get, "/api/v1/records/runs/{id}", instructor, kRecords, get_run},
                    {Verb::get, "/api/v1/records/runs/{id}/debrief", instructor, kRecords, debrief},
                    {Verb::post, "/api/v1/records/runs/{id}/notes", instructor, kRecords, post_note},
                    {Verb::get, "/api/v1/records/trainees", instructor, kRecords, get_trainees},
                    {Verb::get, "/api/v1/records/export.csv", instructor, kRecords, export_csv, kFilters},
                    {Verb::delete_, "/api/v1/records/trainees/{name}", instructor, kRecords, delete_trainee},
                });
}

}  // namespace droopline::server
