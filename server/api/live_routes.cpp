// The routes of the live session: reads for everyone, changes for the instructor.
#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <sstream>

#include "api.hpp"
#include "droopline/exercise.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"
#include "typed_text.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

// Why a route needs the instructor token, in words a trainee can act on.
constexpr const char* kChanges = "only the instructor can change the simulation";
// Why a route needs a seat's join code (or the instructor token).
constexpr std::size_t kMaxBatchCommands = 100;
constexpr const char* kOperates = "only an operator seat or the instructor can send commands";
// Why the seat list is the instructor's: it holds the join codes.
constexpr const char* kSeats = "only the instructor sees the seats' join codes";
constexpr const char* kScript = "only the instructor sees and changes the exercise's script";
constexpr const char* kAck = "only an operator seat or the instructor can acknowledge alarms";
constexpr const char* kSavePoints = "only the instructor sees the save points";
constexpr const char* kJoin = "only an operator seat enters a trainee's name (use the seat's join code)";
constexpr const char* kObjectives = "a seat sees its own objectives and the instructor every seat's";
constexpr const char* kNotes = "only the instructor writes and reads the notes";

// For a seat's call: its areas as the roster has them now, in `scope` (a seat dropped by loading
// another exercise acts no more: answered 403, false). The instructor's call: no scope.
bool seat_scope(Services& s, const Call& c, std::optional<SeatScope>& scope) {
  if (c.role != Role::seat) return true;
  const std::optional<SeatIdentity> now = c.seat ? s.seats.find(c.seat->id) : std::nullopt;
  if (!now) {
    c.error(403, "this seat is not part of the running exercise: ask the instructor for a new code");
    return false;
  }
  scope = SeatScope{now->id, now->areas};
  return true;
}

// What the live session's change came to, as a reply (any thread).
LiveSession::Done answer(const Call& call) {
  return [respond = call.respond](LiveSession::Result r) {
    Reply out;
    out.status = r.status;
    out.body = r.status == 200 ? r.data.dump() : error_json(r.error, issue_texts(r.issues));
    respond(std::move(out));
  };
}

// The answer to a load: once it is in, the roster takes the new seats (new join codes, the old
// ones stop working; none for a plain scenario).
LiveSession::Done answer_with_seats(Services& s, const Call& c, std::vector<study::SeatDef> seats) {
  return [&s, seats = std::move(seats), done = answer(c)](LiveSession::Result r) {
    if (r.status == 200) s.seats.set(seats);
    done(std::move(r));
  };
}

// A text reply with its own content type.
Reply text_reply(std::string type, std::string body) {
  Reply r;
  r.type = std::move(type);
  r.body = std::move(body);
  return r;
}

std::string metrics_text(const Services& s) {
  const LiveCounters& l = s.live->counters();
  const NetCounters& n = s.counters;
  std::ostringstream o;
  auto metric = [&](const char* name, const char* type, const char* help, double value) {
    o << "# HELP " << name << ' ' << help << "\n# TYPE " << name << ' ' << type << '\n'
      << name << ' ' << fmt_exact(value) << '\n';
  };
  auto count = [](const std::atomic<std::uint64_t>& c) { return static_cast<double>(c.load()); };
  metric("droopline_loop_realtime", "gauge",
         "1 when the loop runs at a real-time priority, 0 at normal priority (network threads then yield to it).",
         std::max(0, l.realtime.load()));
  metric("droopline_steps_total", "counter", "Engine steps taken.", count(l.steps));
  metric("droopline_step_overruns_total", "counter", "Loop wakes more than one step late.",
         count(l.overruns));
  metric("droopline_step_slips_total", "counter", "Times the schedule was rebased after a bounded catch-up.",
         count(l.slips));
  metric("droopline_loop_lag_seconds", "gauge", "Lateness of the last loop wake against its time.", l.lag_s.load());
  metric("droopline_loop_lag_max_seconds", "gauge", "Worst lateness since start.", l.jitter_max_s.load());
  o << "# HELP droopline_loop_lateness_seconds Lateness of each loop wake against its time (the next frame, or each step with --wake-every-step).\n"
       "# TYPE droopline_loop_lateness_seconds histogram\n";
  std::uint64_t cumulative = 0;
  for (std::size_t b = 0; b < LiveCounters::kLagBuckets; ++b) {
    cumulative += l.lag_counts[b].load();
    o << "droopline_loop_lateness_seconds_bucket{le=\""
      << (b < std::size(LiveCounters::kLagBounds) ? fmt_exact(LiveCounters::kLagBounds[b]) : std::string("+Inf"))
      << "\"} " << cumulative << '\n';
  }
  o << "droopline_loop_lateness_seconds_sum " << fmt_exact(l.lag_sum_s.load()) << '\n'
    << "droopline_loop_lateness_seconds_count " << cumulative << '\n';
  metric("droopline_realtime_factor", "gauge", "Simulated seconds per wall second over the last second.",
         l.realtime_factor.load());
  metric("droopline_speed", "gauge", "Requested speed factor.", s.live->speed());
  metric("droopline_paused", "gauge", "1 while paused.", s.live->paused() ? 1.0 : 0.0);
  metric("droopline_clients", "gauge", "Open streaming clients.", count(n.clients));
  metric("droopline_connections", "gauge", "Open TCP connections.", count(n.connections));
  metric("droopline_connections_refused_total", "counter", "Connections refused at the limit.", count(n.refused));
  metric("droopline_auth_refused_total", "counter", "Tokens and join codes refused (HTTP and WebSocket).",
         count(n.auth_refused));
  metric("droopline_frames_encoded_total", "counter", "Telemetry frames encoded.", count(l.frames));
  metric("droopline_frames_sent_total", "counter", "Telemetry frames delivered to clients.", count(n.frames_sent));
  metric("droopline_frames_dropped_total", "counter", "Telemetry frames dropped for slow clients.",
         count(n.frames_dropped));
  metric("droopline_slow_clients_closed_total", "counter", "Clients closed for staying behind.", count(n.slow_closed));
  metric("droopline_commands_total", "counter", "Commands applied.", count(l.commands));
  metric("droopline_commands_refused_total", "counter", "Commands refused.", count(l.commands_refused));
  metric("droopline_http_requests_total", "counter", "HTTP requests answered.", count(n.requests));
  metric("droopline_replays_total", "counter", "Replays run.", count(n.replays));
  metric("droopline_replays_refused_total", "counter", "Replays refused (busy or too large).",
         count(n.replays_refused));
  metric("droopline_replays_active", "gauge", "Replays running or queued.", count(n.replays_active));
  return o.str();
}

void healthz(Services& s, Call& c) {
  c.reply(200, json{{"status", "ok"}, {"paused", s.live->paused()}, {"clients", s.counters.clients.load()}}.dump());
}

void metrics(Services& s, Call& c) {
  c.respond(text_reply("text/plain; version=0.0.4; charset=utf-8", metrics_text(s)));
}

void state(Services& s, Call& c) {
  s.live->state([respond = c.respond](std::string text) {
    respond(Reply{200, "application/json", std::move(text), {}, {}});
  });
}

void role(Services&, Call& c) {
  if (c.refused_status) return c.error(c.refused_status, c.refused);
  json out{{"role", role_name(c.role)}};
  if (c.seat) out["seat"] = {{"id", c.seat->id}, {"name", c.seat->name}, {"areas", c.seat->areas}};
  c.reply(200, out.dump());
}

void get_scenario(Services& s, Call& c) {
  // An exercise's own events are what is to come: only the instructor sees them.
  s.live->scenario(
      [respond = c.respond](std::string text) { respond(Reply{200, "application/json", std::move(text), {}, {}}); },
      c.role == Role::instructor);
}

// ------------------------------------------------------------------ exercise, script, alarms

void get_exercise(Services& s, Call& c) { s.live->exercise(answer(c)); }

void put_exercise(Services& s, Call& c) {
  // Over HTTP only an inline scenario: a path would reach the server's disk.
  study::ExerciseLoad x = study::parse_exercise(c.request.body, "");
  if (!x.exercise) return c.error(400, "invalid exercise; nothing changed", issue_texts(x.issues));
  std::vector<study::SeatDef> seats = x.exercise->def.seats;
  s.live->load_exercise(std::move(*x.exercise), answer_with_seats(s, c, std::move(seats)));
}

void get_script(Services& s, Call& c) { s.live->script(answer(c)); }

void add_script(Services& s, Call& c) {
  std::vector<Issue> issues;
  auto ev = study::parse_script_event(c.request.body, issues);
  if (!ev) return c.error(400, "invalid script event; nothing changed", issue_texts(issues));
  s.live->script_add(std::move(*ev), "instructor", answer(c));
}

void fire_script(Services& s, Call& c) { s.live->script_fire(c.params[0], "instructor", answer(c)); }

void skip_script(Services& s, Call& c) { s.live->script_skip(c.params[0], "instructor", answer(c)); }

void shift_script(Services& s, Call& c) {
  std::string bad;
  const auto parsed = parse_untrusted_json(c.request.body, bad);
  if (!parsed) return c.error(400, bad);
  const json& j = *parsed;
  if (!j.is_object() || j.size() != 1 || !j.contains("at_s") || !j["at_s"].is_number())
    return c.error(400, "body must be {\"at_s\": a time in seconds}");
  s.live->script_shift(c.params[0], j["at_s"].get<double>(), "instructor", answer(c));
}

void get_alarms(Services& s, Call& c) {
  const std::string active = c.target.get("active", "0");
  if (active != "0" && active != "1")
    return c.error(400, "query parameter active: must be 0 or 1, got " + quote_cut(active));
  s.live->alarms(active == "1", answer(c));
}

void ack_alarm(Services& s, Call& c) {
  const std::string& id = c.params[0];
  if (id.empty() || id.size() > 15 || id.find_first_not_of("0123456789") != std::string::npos)
    return c.error(400, "alarm id: must be a whole number of at most 15 digits, got " + quote_cut(id));
  // Who acknowledges: the instructor, or a seat (then only alarms of its own areas).
  std::optional<SeatScope> scope;
  if (!seat_scope(s, c, scope)) return;
  const std::string author = scope ? scope->seat : "instructor";
  s.live->ack_alarm(std::stoull(id), author, std::move(scope), answer(c));
}

void put_scenario(Services& s, Call& c) {
  LoadResult r = parse_scenario(c.request.body);
  if (!r.system) return c.error(400, "invalid scenario; nothing changed", issue_texts(r.issues));
  // A plain scenario ends the exercise, and with it the seats.
  s.live->load(std::move(*r.system), answer_with_seats(s, c, {}));
}

void commands(Services& s, Call& c) {
  CommandParse cp = parse_commands(c.request.body);
  if (!cp.issues.empty()) return c.error(400, "invalid command; nothing applied", issue_texts(cp.issues));
  // Each command is an event every client is sent and keeps: a batch is what an operator does at
  // one moment, not a flood that would fill every screen's queue at once.
  if (cp.commands.size() > kMaxBatchCommands)
    return c.error(413, "a batch holds at most " + std::to_string(kMaxBatchCommands) + " commands, this one " +
                            std::to_string(cp.commands.size()) + "; nothing applied");
  std::optional<SeatScope> scope;
  if (!seat_scope(s, c, scope)) return;
  std::string author = scope ? scope->seat : "instructor";
  s.live->apply(std::move(cp.commands), std::move(author), std::move(scope), answer(c));
}

void seats(Services& s, Call& c) {
  json list = json::array();
  for (const SeatStatus& seat : s.seats.list())
    list.push_back({{"id", seat.id},
                    {"name", seat.name},
                    {"areas", seat.areas},
                    {"join_code", seat.join_code},
                    {"joined", seat.joined},
                    {"trainee", seat.trainee},
                    {"streams", seat.streams}});
  c.reply(200, json{{"seats", list}}.dump());
}

void control(Services& s, Call& c) {
  std::string bad;
  const auto parsed = parse_untrusted_json(c.request.body, bad);
  if (!parsed) return c.error(400, bad);
  const json& j = *parsed;
  if (!j.is_object())
    return c.error(400,
                   "body must be {\"action\": \"pause\" | \"resume\" | \"reset\" | \"speed\" | \"rewind\" | \"end\", "
                   "\"speed\": x, \"to_s\": t}");
  std::vector<std::string> unknown;
  unknown_fields(j, {"action", "speed", "to_s"}, unknown);
  if (!unknown.empty()) return c.error(400, unknown.size() == 1 ? unknown.front() : "unknown fields", unknown);
  const std::string action = j.contains("action") && j["action"].is_string() ? j["action"].get<std::string>() : "";
  // "speed" goes with the speed action and "to_s" with rewind only: a field the action would
  // ignore is a mistake worth saying (a pause sent with a speed does not change the speed).
  for (const auto& [field, owner] : {std::pair{"speed", "speed"}, std::pair{"to_s", "rewind"}})
    if (j.contains(field) && action != owner)
      return c.error(400, std::string(field) + ": only with \"action\": \"" + owner + "\"");
  if (action == "pause") return s.live->pause(answer(c));
  if (action == "resume") return s.live->resume(answer(c));
  if (action == "reset") return s.live->reset(answer(c));
  if (action == "end") return s.live->end_exercise("instructor", answer(c));
  if (action == "rewind") {
    // JSON numbers are finite; the session checks the range against its lineage.
    if (!j.contains("to_s"))
      return c.error(400, "to_s: required, the simulation time to go back to (s), a number");
    if (!j["to_s"].is_number())
      return c.error(400, std::string("to_s: must be a number (the simulation time to go back to, s), got ") +
                              j["to_s"].type_name());
    return s.live->rewind(j["to_s"].get<double>(), "instructor", answer(c));
  }
  if (action != "speed")
    return c.error(
        400, "action: must be one of \"pause\", \"resume\", \"reset\", \"speed\", \"rewind\", \"end\", got " +
                 (j.contains("action") ? clip_text(j["action"].dump(-1, ' ', false, json::error_handler_t::replace), 64)
                                       : std::string("nothing")));
  if (!j.contains("speed")) return c.error(400, "speed: required, a number from 0.1 to 100");
  if (!j["speed"].is_number())
    return c.error(400, std::string("speed: must be a number from 0.1 to 100, got ") + j["speed"].type_name());
  const double speed = j["speed"].get<double>();
  if (!(speed >= 0.1 && speed <= 100.0))
    return c.error(400, "speed: must lie within [0.1, 100], got " + fmt_num(speed));
  s.live->set_speed(speed, answer(c));
}

}  // namespace

std::optional<std::string> typed_body(const Call& c, const TypedTextRule& rule) {
  std::string bad;
  const auto parsed = parse_untrusted_json(c.request.body, bad);
  if (!parsed) {
    c.error(400, bad);
    return std::nullopt;
  }
  const json& j = *parsed;
  const std::string field = rule.field;
  const std::string shape = "body must be {\"" + field + "\": \"...\"}";
  if (!j.is_object()) {
    c.error(400, shape);
    return std::nullopt;
  }
  for (const auto& [key, value] : j.items())
    if (key != field) {
      c.error(400, quote_cut(key) + ": unknown field (" + shape + ")");
      return std::nullopt;
    }
  if (!j.contains(field) || !j[field].is_string()) {
    c.error(400, field + ": required, a string of 1 to " + std::to_string(rule.refuse_over) + " bytes");
    return std::nullopt;
  }
  std::string why;
  auto text = typed_text(j[field].get_ref<const std::string&>(), rule, why);
  if (!text) c.error(400, why);
  return text;
}

namespace {

void join_seat(Services& s, Call& c) {
  if (c.role != Role::seat) return c.error(403, kJoin);
  std::optional<SeatScope> scope;
  if (!seat_scope(s, c, scope)) return;
  auto name = typed_body(c, kTraineeName);
  if (!name) return;
  const std::string seat = scope->seat;
  s.live->trainee(seat, *name, [&s, seat, name = *name, done = answer(c)](LiveSession::Result r) {
    if (r.status == 200) s.seats.set_trainee(seat, name);
    done(std::move(r));
  });
}

void get_objectives(Services& s, Call& c) {
  // A seat sees its own seat's objectives only; the instructor sees every seat's.
  std::optional<SeatScope> scope;
  if (!seat_scope(s, c, scope)) return;
  s.live->objectives(scope ? std::optional<std::string>(scope->seat) : std::nullopt, answer(c));
}

void post_note(Services& s, Call& c) {
  auto text = typed_body(c, kNoteText);
  if (!text) return;
  s.live->add_note(std::move(*text), "instructor", answer(c));
}

void get_notes(Services& s, Call& c) { s.live->notes(answer(c)); }

void post_savepoint(Services& s, Call& c) {
  std::string bad;
  const auto parsed = parse_untrusted_json(c.request.body, bad);
  if (!parsed) return c.error(400, bad);
  const json& j = *parsed;
  if (!j.is_object()) return c.error(400, "body must be {\"name\": \"...\"}");
  for (const auto& [key, value] : j.items())
    if (key != "name") return c.error(400, quote_cut(key) + ": unknown field (a save point has only \"name\")");
  if (j.contains("name") && !j["name"].is_string())
    return c.error(400, "name: must be a string (cut to " + std::to_string(LiveSession::kMaxNameBytes) + " bytes)");
  s.live->save(j.value("name", std::string()), "instructor", answer(c));
}

void get_savepoints(Services& s, Call& c) { s.live->save_points(answer(c)); }

void restore_savepoint(Services& s, Call& c) {
  const std::string& id = c.params.at(0);
  // Ids are 1, 2, ... : at most 15 digits keeps the number exact.
  if (id.empty() || id.size() > 15 || id.find_first_not_of("0123456789") != std::string::npos)
    return c.error(404,
                   "no save point " + quote_cut(id) + " (ids are whole numbers: GET /api/v1/savepoints lists them)");
  s.live->restore(std::stoull(id), "instructor", answer(c));
}

void history(Services& s, Call& c) {
  const Target& t = c.target;
  double from = 0, to = 0, every = 0;
  std::string err;
  if (!query_number(t, "from_s", -1e300, from, err) || !query_number(t, "to_s", 1e300, to, err) ||
      !query_number(t, "every_s", 0.0, every, err))
    return c.error(400, err);
  const std::string format = t.get("format", "json");
  if (format != "json" && format != "csv")
    return c.error(400, "query parameter format: must be json or csv, got " + quote_cut(format));
  if (every < 0) return c.error(400, "query parameter every_s: must be >= 0");
  if (from > to) return c.error(400, "query parameters: from_s must not lie after to_s");
  const bool csv = format == "csv";
  std::optional<std::string> rows = s.live->history(from, to, every, csv, err);
  if (!rows) return c.error(400, err);
  c.respond(text_reply(csv ? "text/csv; charset=utf-8" : "application/json", std::move(*rows)));
}

void events(Services& s, Call& c) {
  double since = 0;
  std::string err;
  if (!query_number(c.target, "since", 0, since, err)) return c.error(400, err);
  if (!(since >= 0 && since <= 9007199254740992.0 && since == std::floor(since)))
    return c.error(400, "query parameter since: must be a whole number from 0 to 2^53, got " + fmt_num(since));
  c.reply(200, s.live->events(static_cast<std::uint64_t>(since)));
}

void record(Services& s, Call& c) {
  double from = 0, to = 0;
  std::string err;
  if (!query_number(c.target, "from_s", 0.0, from, err) || !query_number(c.target, "to_s", 1e300, to, err))
    return c.error(400, err);
  const std::string part = c.target.get("part", "cfg");
  if (part != "cfg" && part != "dat")
    return c.error(400, "query parameter part: must be cfg or dat, got \"" + part + "\"");
  if (!(from < to)) return c.error(400, "query parameters: from_s must lie before to_s");
  study::ComtradeRecord rec = s.live->record(from, to);
  if (!rec.error.empty())
    return c.error(404, rec.error + " (the history holds the last " + fmt_num(s.options.history_s) + " s)");
  Reply r = text_reply("text/plain; charset=us-ascii", part == "cfg" ? std::move(rec.cfg) : std::move(rec.dat));
  r.headers.emplace_back("Content-Disposition", "attachment; filename=\"droopline-record." + part + "\"");
  c.respond(std::move(r));
}

// A plain request to the stream (an upgrade goes to the WebSocket session before the routes):
// 426 names the protocol to upgrade to (RFC 9110 15.5.22), and a sender of Upgrade lists it in
// Connection too (7.8).
void stream(Services&, Call& c) {
  c.respond(Reply{426, "application/json", error_json("/api/v1/stream is a WebSocket: send an upgrade request"),
                  {{"Upgrade", "websocket"}, {"Connection", "Upgrade"}}, {}});
}

void openapi(Services&, Call& c) {
  Reply r;
  r.file = "/openapi.json";
  c.respond(std::move(r));
}

}  // namespace

void add_live_routes(std::vector<Route>& routes) {
  const Role viewer = Role::viewer, seat = Role::seat, instructor = Role::instructor;
  routes.insert(routes.end(), {
                                  {Verb::get, "/healthz", viewer, "", healthz},
                                  {Verb::get, "/metrics", viewer, "", metrics},
                                  {Verb::get, "/api/v1/state", viewer, "", state},
                                  {Verb::get, "/api/v1/role", viewer, "", role},
                                  {Verb::get, "/api/v1/scenario", viewer, "", get_scenario},
                                  {Verb::put, "/api/v1/scenario", instructor, kChanges, put_scenario},
                                  {Verb::post, "/api/v1/commands", seat, kOperates, commands},
                                  {Verb::get, "/api/v1/seats", instructor, kSeats, seats},
                                  {Verb::post, "/api/v1/seats/join", seat, kJoin, join_seat},
                                  {Verb::get, "/api/v1/objectives", seat, kObjectives, get_objectives},
                                  {Verb::post, "/api/v1/notes", instructor, kNotes, post_note},
                                  {Verb::get, "/api/v1/notes", instructor, kNotes, get_notes},
                                  {Verb::post, "/api/v1/control", instructor, kChanges, control},
                                  {Verb::post, "/api/v1/savepoints", instructor, kChanges, post_savepoint},
                                  {Verb::get, "/api/v1/savepoints", instructor, kSavePoints, get_savepoints},
                                  {Verb::post, "/api/v1/savepoints/{id}/restore", instructor, kChanges,
                                   restore_savepoint},
                                  {Verb::get, "/api/v1/history", viewer, "", history, {"from_s", "to_s", "every_s", "format"}},
                                  {Verb::get, "/api/v1/events", viewer, "", events, {"since"}},
                                  {Verb::get, "/api/v1/record", viewer, "", record, {"from_s", "to_s", "part"}},
                                  {Verb::get, "/api/v1/stream", viewer, "", stream, kStreamQuery},
                                  {Verb::get, "/api/v1/exercise", viewer, "", get_exercise},
                                  {Verb::put, "/api/v1/exercise", instructor, kChanges, put_exercise},
                                  {Verb::get, "/api/v1/script", instructor, kScript, get_script},
                                  {Verb::post, "/api/v1/script", instructor, kScript, add_script},
                                  {Verb::post, "/api/v1/script/{id}/fire", instructor, kScript, fire_script},
                                  {Verb::post, "/api/v1/script/{id}/skip", instructor, kScript, skip_script},
                                  {Verb::post, "/api/v1/script/{id}/shift", instructor, kScript, shift_script},
                                  {Verb::get, "/api/v1/alarms", viewer, "", get_alarms, {"active"}},
                                  {Verb::post, "/api/v1/alarms/{id}/ack", seat, kAck, ack_alarm},
                                  {Verb::get, "/api/v1/openapi.json", viewer, "", openapi},
                              });
}

}  // namespace droopline::server
