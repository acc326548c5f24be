#include "api.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdlib>
#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

// True when `path` fits `pattern`; the `{...}` segments (one non-empty segment each) go to `params`.
bool matches(const std::string& pattern, const std::string& path, std::vector<std::string>& params) {
  const auto want = split_on(pattern, "/");
  const auto got = split_on(path, "/");
  params.clear();
  if (got.size() != want.size()) return false;
  for (std::size_t i = 0; i < want.size(); ++i) {
    const bool param = want[i].size() > 2 && want[i].front() == '{' && want[i].back() == '}';
    if (param && !got[i].empty())
      params.emplace_back(got[i]);
    else if (param || got[i] != want[i])
      return false;
  }
  return true;
}

}  // namespace

const char* verb_name(Verb verb) {
  switch (verb) {
    case Verb::get:
      return "GET";
    case Verb::head:
      return "HEAD";
    case Verb::post:
      return "POST";
    case Verb::put:
      return "PUT";
    case Verb::delete_:
      return "DELETE";
    case Verb::other:
      break;
  }
  return "OTHER";
}

bool token_matches(const std::string& given, const std::string& token) {
  if (given.size() != token.size() || token.empty()) return false;
  unsigned char diff = 0;
  for (std::size_t i = 0; i < token.size(); ++i) diff |= static_cast<unsigned char>(given[i] ^ token[i]);
  return diff == 0;
}

std::string quote_cut(std::string_view text) {
  constexpr std::size_t kMax = 120;
  std::string out = "\"";
  for (char c : text.substr(0, kMax)) out += (c >= 0x20 && c < 0x7f) ? c : '?';  // printable ASCII only
  return out + (text.size() > kMax ? "...\"" : "\"");
}

std::string unread_query(const Target& t, const std::vector<std::string>& reads, const std::string& route) {
  for (const auto& [key, value] : t.query) {
    if (std::find(reads.begin(), reads.end(), key) != reads.end()) continue;
    std::string list;
    for (const std::string& q : reads) list += (list.empty() ? "" : ", ") + q;
    return "query parameter " + quote_cut(key) + ": not read by " + route +
           (list.empty() ? " (it reads none)" : " (it reads " + list + ")");
  }
  return {};
}

bool query_number(const Target& t, const std::string& key, double fallback, double& out, std::string& error) {
  if (!t.has(key)) {
    out = fallback;
    return true;
  }
  const std::string v = t.get(key);
  char* end = nullptr;
  // Decimal only: strtod would also take hexadecimal, "inf" and "nan".
  const bool decimal = !v.empty() && v.find_first_not_of("0123456789+-.eE") == std::string::npos;
  out = decimal ? std::strtod(v.c_str(), &end) : 0.0;
  if (!decimal || end != v.c_str() + v.size() || !std::isfinite(out)) {
    error = "query parameter " + key + ": must be a decimal number, got " + quote_cut(v);
    return false;
  }
  return true;
}

void unknown_fields(const json& j, std::initializer_list<std::string_view> known, std::vector<std::string>& problems,
                    const std::string& where) {
  std::string list;
  for (std::string_view k : known) (list += list.empty() ? "" : ", ") += k;
  for (auto it = j.begin(); it != j.end(); ++it)
    if (std::find(known.begin(), known.end(), it.key()) == known.end())
      problems.push_back(where + quote_cut(it.key()) + ": unknown field (expected " + list + ")");
}

std::string error_json(const std::string& message, const std::vector<std::string>& issues) {
  constexpr std::size_t kMaxIssues = 200;
  json j{{"error", clip_text(message)}};
  if (!issues.empty()) {
    json list = json::array();
    for (std::size_t i = 0; i < issues.size() && i < kMaxIssues; ++i) list.push_back(clip_text(issues[i]));
    if (issues.size() > kMaxIssues) list.push_back("... and " + std::to_string(issues.size() - kMaxIssues) + " more");
    j["issues"] = std::move(list);
  }
  return j.dump(-1, ' ', false, json::error_handler_t::replace);
}

std::vector<std::string> issue_texts(const std::vector<Issue>& issues) {
  std::vector<std::string> out;
  for (const Issue& i : issues)
    if (!i.warning) out.push_back(i.text());
  return out;
}

int read_bearer(std::string_view header, std::string& given, std::string& why) {
  std::size_t sp = header.find(' ');
  std::string scheme(header.substr(0, sp));
  for (char& c : scheme) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  if (scheme != "bearer") {
    why = "the instructor token or a seat's join code goes in 'Authorization: Bearer TOKEN' (got the scheme " +
          quote_cut(scheme) + ")";
    return 401;
  }
  std::string_view rest = sp == std::string_view::npos ? std::string_view() : header.substr(sp + 1);
  while (!rest.empty() && rest.front() == ' ') rest.remove_prefix(1);
  while (!rest.empty() && rest.back() == ' ') rest.remove_suffix(1);
  if (rest.empty()) {
    why = "the Authorization header holds no token after 'Bearer'";
    return 401;
  }
  given = std::string(rest);
  return 0;
}

Proof prove(std::string_view given, const std::string& token, SeatRoster& seats) {
  Proof p;
  if (token_matches(std::string(given), token)) {
    p.role = Role::instructor;
  } else if ((p.seat = seats.sign_in(given))) {
    p.role = Role::seat;
  } else {
    p.refused_status = 403;
    p.refused = seats.any() ? "neither the instructor token nor a seat's join code" : "wrong instructor token";
  }
  return p;
}

const char* role_name(Role role) {
  switch (role) {
    case Role::viewer:
      return "viewer";
    case Role::seat:
      return "seat";
    case Role::instructor:
      return "instructor";
  }
  return "viewer";
}

void Call::reply(int status, std::string json_body) const {
  Reply r;
  r.status = status;
  r.body = std::move(json_body);
  respond(std::move(r));
}

void Call::error(int status, const std::string& message, const std::vector<std::string>& issues) const {
  reply(status, error_json(message, issues));
}

Api::Api(Services& services) : services_(services), routes_(route_table()) {}


std::vector<Route> route_table() {
  std::vector<Route> routes;
  add_live_routes(routes);
  add_study_routes(routes);
  add_fit_routes(routes);
  add_debrief_routes(routes);
  add_records_routes(routes);
  return routes;
}

Proof role_of(const Request& req, const std::string& token, SeatRoster& seats) {
  if (!req.authorization) return Proof{req.role, req.seat, 0, {}};
  Proof p;
  std::string given;
  p.refused_status = read_bearer(*req.authorization, given, p.refused);
  if (p.refused_status) {
    p.role = req.role;
    p.seat = req.seat;
    return p;
  }
  p = prove(given, token, seats);
  if (p.refused_status) {
    p.role = req.role;
    p.seat = req.seat;
  }
  return p;
}

bool Api::handle(const Request& req, Respond respond) {
  Call call{req, parse_target(req.target), {}, Role::viewer, {}, 0, {}, std::move(respond)};
  if (!call.target.ok) {
    call.error(400, "malformed percent-encoding in the request target");
    return true;
  }
  const std::string& path = call.target.path;
  const Route* route = nullptr;
  std::string allow;
  std::vector<std::string> params;
  // HEAD is answered by the GET route (the session sends the headers only), as HTTP asks of
  // every server that takes GET (RFC 9110, 9.3.2).
  const Verb verb = req.verb == Verb::head ? Verb::get : req.verb;
  for (const Route& r : routes_) {
    if (!matches(r.pattern, path, params)) continue;
    allow += (allow.empty() ? "" : ", ") + std::string(verb_name(r.verb));
    if (r.verb == Verb::get) allow += ", HEAD";
    if (r.verb == verb && !route) {
      route = &r;
      call.params = params;
    }
  }
  if (!route) {
    if (!allow.empty()) {
      Reply r;
      r.status = 405;
      r.body = error_json("method not allowed; use " + allow);
      r.headers.emplace_back("Allow", allow);
      call.respond(std::move(r));
      return true;
    }
    if (path.rfind("/api/", 0) != 0) return false;  // one of the page's files, or nothing
    call.error(404, "no API endpoint " + quote_cut(path));
    return true;
  }
  // The role policy, in one place: a route refuses a caller below its role, a viewer with 401 (or
  // the refused token's own 401/403 and reason), a seat on an instructor route with 403 and the
  // route's reason. What a seat may do within a seat route (its own areas) the handler checks.
  Proof proof = role_of(req, services_.token, services_.seats);
  call.role = proof.role;
  call.seat = std::move(proof.seat);
  call.refused_status = proof.refused_status;
  call.refused = std::move(proof.refused);
  if (call.role < route->role) {
    if (call.refused_status)
      call.error(call.refused_status, call.refused);
    else if (call.role == Role::seat)
      call.error(403, std::string(route->why) + " (seat " + quote_cut(call.seat ? call.seat->id : "") +
                          " may act only on its own areas' units, secondary control, schedule and load)");
    else
      call.error(401, std::string(route->why) + ": " + req.token_hint);
    return true;
  }
  // A parameter the route does not read is refused, not ignored: a misspelt `form_s` would
  // otherwise quietly answer for the whole history.
  if (std::string unread = unread_query(call.target, route->query, std::string(verb_name(route->verb)) + " " + route->pattern);
      !unread.empty()) {
    call.error(400, unread);
    return true;
  }
  route->handler(services_, call);
  return true;
}

std::string Api::table_json() const {
  json out = json::array();
  for (const Route& r : routes_)
    out.push_back({{"verb", verb_name(r.verb)},
                   {"path", r.pattern},
                   {"role", role_name(r.role)}});
  return out.dump();
}

}  // namespace droopline::server
