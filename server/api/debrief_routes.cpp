// The debrief of the live session's run (or of an earlier run of its journal), built from the
// journal on the worker pool: it re-simulates the run, which neither the loop nor an I/O thread
// should wait for.
#include <algorithm>
#include <cctype>

#include "api.hpp"
#include "droopline/debrief.hpp"

namespace droopline::server {
namespace {

constexpr const char* kDebrief =
    "the debrief is for the instructor (it holds trainee names and scores, and runs on the server's worker pool)";

}  // namespace

void respond_with_debrief(Services& s, Call& c, std::string path, std::string run, study::DebriefExtras extras) {
  if (!take_run_slot(s, c,
                     "too many replays and debriefs at once (at most " + std::to_string(s.options.max_replays) +
                         "); retry later")) {
    s.counters.replays_refused.fetch_add(1);
    return;
  }
  s.run_on_workers([&s, path, run, extras = std::move(extras), respond = c.respond] {
    std::string error;
    std::optional<std::string> html = study::debrief_html(path, run, extras, error);
    s.counters.replays_active.fetch_sub(1);
    if (!html)
      return respond(Reply{
          error.rfind("no run", 0) == 0 ? 404 : 500, "application/json", error_json("no debrief: " + error), {}, {}});
    respond(Reply{200, "text/html; charset=utf-8", std::move(*html), {{"Cache-Control", "no-store"}}, {}});
  });
}

namespace {

void get_debrief(Services& s, Call& c) {
  const std::string path = s.options.journal;
  if (path.empty()) return c.error(404, "no journal: start droopline serve with --journal FILE to have debriefs");
  const std::string run = c.target.get("run");
  if (run.size() > 64 || std::any_of(run.begin(), run.end(), [](char ch) {
        return !std::isalnum(static_cast<unsigned char>(ch)) && ch != '-' && ch != '_';
      }))
    return c.error(400,
                   "query parameter run: a run id of letters, digits, '-' and '_' (at most 64), got " + quote_cut(run));
  respond_with_debrief(s, c, path, run, {});
}

}  // namespace

void add_debrief_routes(std::vector<Route>& routes) {
  routes.push_back({Verb::get, "/api/v1/debrief", Role::instructor, kDebrief, get_debrief, {"run"}});
}

}  // namespace droopline::server
