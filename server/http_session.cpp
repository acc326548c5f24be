#include "http_session.hpp"

#include <sstream>
#include <type_traits>

#include <nlohmann/json.hpp>
#include <spdlog/spdlog.h>

#include "cli_run.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/assess.hpp"
#include "droopline/modes.hpp"
#include "droopline/sweep.hpp"
#include "droopline/scenario_io.hpp"
#include "http_target.hpp"
#include "websocket_session.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

constexpr auto kHeaderTimeout = std::chrono::seconds(10);  // slow-loris guard per request
constexpr std::size_t kHeaderLimit = 16 * 1024;
constexpr double kMaxSweepMembers = 100000;  // runs in one sweep job
// Why a route needs the instructor token, in words a trainee can act on.
constexpr const char* kChanges = "only the instructor can change the simulation";
constexpr const char* kSweeps = "sweeps are for the instructor (a sweep job runs on the server's spare cores)";
// Lingering close after an early error reply: what is still read and thrown away, at most.
constexpr auto kLingerTime = std::chrono::seconds(5);
constexpr std::size_t kLingerBytes = 8u << 20;

// A client-supplied text quoted in a message, cut to a readable length.
std::string quote_cut(std::string_view text) {
  constexpr std::size_t kMax = 120;
  std::string out = "\"";
  for (char c : text.substr(0, kMax)) out += (c >= 0x20 && c < 0x7f) ? c : '?';  // printable ASCII only
  return out + (text.size() > kMax ? "...\"" : "\"");
}

// Reads `Authorization: Bearer TOKEN` (the scheme in any case, RFC 9110); 0 when it carries the
// instructor token, else the status (401 not a bearer token, 403 the wrong one) and why.
int check_bearer(std::string_view header, const std::string& token, std::string& why) {
  std::size_t sp = header.find(' ');
  std::string scheme(header.substr(0, sp));
  for (char& c : scheme) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  if (scheme != "bearer") {
    why = "the instructor token goes in 'Authorization: Bearer TOKEN' (got the scheme " + quote_cut(scheme) + ")";
    return 401;
  }
  std::string_view given = sp == std::string_view::npos ? std::string_view() : header.substr(sp + 1);
  while (!given.empty() && given.front() == ' ') given.remove_prefix(1);
  while (!given.empty() && given.back() == ' ') given.remove_suffix(1);
  if (given.empty()) {
    why = "the Authorization header holds no token after 'Bearer'";
    return 401;
  }
  if (!token_matches(std::string(given), token)) {
    why = "wrong instructor token";
    return 403;
  }
  return 0;
}

std::vector<std::string> issue_texts(const std::vector<Issue>& issues) {
  std::vector<std::string> out;
  for (const Issue& i : issues)
    if (!i.warning) out.push_back(i.text());
  return out;
}

// A number from the query, or an error message naming the parameter.
bool query_number(const Target& t, const std::string& key, double fallback, double& out,
                  std::string& error) {
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

std::string metrics_text(const Context& ctx) {
  const LiveCounters& l = ctx.live->counters();
  const NetCounters& n = ctx.counters;
  std::ostringstream o;
  auto metric = [&](const char* name, const char* type, const char* help, double value) {
    o << "# HELP " << name << ' ' << help << "\n# TYPE " << name << ' ' << type << '\n'
      << name << ' ' << fmt_exact(value) << '\n';
  };
  metric("droopline_steps_total", "counter", "Engine steps taken.", static_cast<double>(l.steps.load()));
  metric("droopline_step_overruns_total", "counter", "Loop wakes more than one step behind the deadline.",
         static_cast<double>(l.overruns.load()));
  metric("droopline_step_slips_total", "counter", "Times the schedule was rebased after a bounded catch-up.",
         static_cast<double>(l.slips.load()));
  metric("droopline_loop_lag_seconds", "gauge", "Lateness of the last step against its deadline.", l.lag_s.load());
  metric("droopline_loop_lag_max_seconds", "gauge", "Worst lateness since start.", l.jitter_max_s.load());
  o << "# HELP droopline_loop_lateness_seconds Lateness of each loop wake against its step deadline.\n"
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
  metric("droopline_speed", "gauge", "Requested speed factor.", ctx.live->speed());
  metric("droopline_paused", "gauge", "1 while paused.", ctx.live->paused() ? 1.0 : 0.0);
  metric("droopline_clients", "gauge", "Open streaming clients.", static_cast<double>(n.clients.load()));
  metric("droopline_connections", "gauge", "Open TCP connections.", static_cast<double>(n.connections.load()));
  metric("droopline_connections_refused_total", "counter", "Connections refused at the limit.",
         static_cast<double>(n.refused.load()));
  metric("droopline_frames_encoded_total", "counter", "Telemetry frames encoded.", static_cast<double>(l.frames.load()));
  metric("droopline_frames_sent_total", "counter", "Telemetry frames delivered to clients.",
         static_cast<double>(n.frames_sent.load()));
  metric("droopline_frames_dropped_total", "counter", "Telemetry frames dropped for slow clients.",
         static_cast<double>(n.frames_dropped.load()));
  metric("droopline_slow_clients_closed_total", "counter", "Clients closed for staying behind.",
         static_cast<double>(n.slow_closed.load()));
  metric("droopline_commands_total", "counter", "Commands applied.", static_cast<double>(l.commands.load()));
  metric("droopline_commands_refused_total", "counter", "Commands refused.", static_cast<double>(l.commands_refused.load()));
  metric("droopline_http_requests_total", "counter", "HTTP requests answered.", static_cast<double>(n.requests.load()));
  metric("droopline_replays_total", "counter", "Replays run.", static_cast<double>(n.replays.load()));
  metric("droopline_replays_refused_total", "counter", "Replays refused (busy or too large).",
         static_cast<double>(n.replays_refused.load()));
  metric("droopline_replays_active", "gauge", "Replays running or queued.", static_cast<double>(n.replays_active.load()));
  return o.str();
}

}  // namespace

http::response<http::string_body> json_response(unsigned version, bool keep_alive, int status,
                                                std::string body) {
  http::response<http::string_body> res{static_cast<http::status>(status), version};
  res.set(http::field::server, "droopline");
  res.set(http::field::content_type, "application/json");
  res.set(http::field::cache_control, "no-store");
  res.keep_alive(keep_alive);
  res.body() = std::move(body);
  res.prepare_payload();
  return res;
}

HttpSession::HttpSession(tcp::socket&& socket, Context& ctx, std::shared_ptr<void> slot)
    : stream_(std::move(socket)), ctx_(ctx), slot_(std::move(slot)) {}

void HttpSession::run() {
  net::dispatch(stream_.get_executor(), beast::bind_front_handler(&HttpSession::do_read, shared_from_this()));
}

void HttpSession::do_read() {
  parser_.emplace();
  parser_->body_limit(ctx_.options.max_body_bytes);
  parser_->header_limit(kHeaderLimit);
  stream_.expires_after(kHeaderTimeout);
  http::async_read(stream_, buffer_, *parser_, beast::bind_front_handler(&HttpSession::on_read, shared_from_this()));
}

void HttpSession::on_read(beast::error_code ec, std::size_t) {
  head_ = false;
  if (ec == http::error::end_of_stream || ec == beast::error::timeout || ec == net::error::operation_aborted ||
      ec == net::error::connection_reset) {
    beast::error_code ignored;
    stream_.socket().shutdown(tcp::socket::shutdown_send, ignored);
    return;
  }
  if (ec == http::error::body_limit) {
    return send_then_linger(json_response(11, false, 413, error_json("request body larger than " +
                                                         std::to_string(ctx_.options.max_body_bytes) + " bytes")));
  }
  if (ec == http::error::header_limit) {
    return send_then_linger(json_response(11, false, 431, error_json("request headers larger than 16 KiB")));
  }
  if (ec) {
    return send_then_linger(json_response(11, false, 400, error_json("malformed HTTP request: " + ec.message())));
  }
  Request req = parser_->release();
  head_ = req.method() == http::verb::head;
  ctx_.counters.requests.fetch_add(1);
  spdlog::debug("{} {}", std::string(req.method_string()), std::string(req.target()));
  if (websocket::is_upgrade(req)) return upgrade(std::move(req));
  const unsigned version = req.version();
  try {
    handle(std::move(req));
  } catch (const std::exception& e) {  // input never takes the server down
    spdlog::error("request failed: {}", e.what());
    send(json_response(version, false, 500, error_json("internal error handling the request")));
  }
}

template <class Body>
void HttpSession::send(http::response<Body> res) {
  const bool keep_alive = res.keep_alive();
  if constexpr (std::is_same_v<Body, http::string_body>)
    if (head_) res.body().clear();  // a HEAD answer has the headers only (Content-Length kept)
  auto msg = std::make_shared<http::response<Body>>(std::move(res));
  writing_ = msg;
  stream_.expires_after(std::chrono::seconds(30));
  http::async_write(stream_, *msg, beast::bind_front_handler(&HttpSession::on_write, shared_from_this(), keep_alive));
}

void HttpSession::on_write(bool keep_alive, beast::error_code ec, std::size_t) {
  writing_.reset();
  if (ec) return;
  if (!keep_alive || ctx_.stopping.load()) {
    beast::error_code ignored;
    stream_.socket().shutdown(tcp::socket::shutdown_send, ignored);
    if (linger_) do_discard();
    return;
  }
  do_read();
}

void HttpSession::send_then_linger(Response res) {
  linger_ = true;
  send(std::move(res));
}

void HttpSession::do_discard() {
  stream_.expires_after(kLingerTime);  // the whole linger, not per read
  stream_.async_read_some(net::buffer(discard_buffer_),
                          beast::bind_front_handler(&HttpSession::on_discard, shared_from_this()));
}

void HttpSession::on_discard(beast::error_code ec, std::size_t bytes) {
  discarded_ += bytes;
  if (ec || discarded_ >= kLingerBytes) return;  // end of stream, reset, timeout or enough: close
  stream_.async_read_some(net::buffer(discard_buffer_),
                          beast::bind_front_handler(&HttpSession::on_discard, shared_from_this()));
}

std::function<void(int, std::string)> HttpSession::later(const Request& req) {
  return [self = shared_from_this(), version = req.version(), keep = req.keep_alive()](int status, std::string body) {
    net::post(self->stream_.get_executor(), [self, version, keep, status, body = std::move(body)]() mutable {
      self->send(json_response(version, keep, status, std::move(body)));
    });
  };
}

void HttpSession::upgrade(Request&& req) {
  const Target t = parse_target(req.target());
  auto refuse = [&](int status, const std::string& why) {
    send(json_response(req.version(), false, status, error_json(why)));
  };
  if (t.path != "/api/v1/stream") return refuse(404, "WebSocket is served at /api/v1/stream only");
  // Browsers send Origin; it must be this server (or an allowed origin). Scripts may omit it.
  if (req.count(http::field::origin)) {
    const std::string origin(req[http::field::origin]);
    const std::string host(req[http::field::host]);
    bool allowed = origin == "http://" + host || origin == "https://" + host;
    for (const auto& a : ctx_.options.allow_origins) allowed = allowed || origin == a;
    if (!allowed) return refuse(403, "WebSocket origin \"" + origin + "\" is not allowed (use --allow-origin)");
  }
  bool instructor = false;
  if (req.count(http::field::authorization)) {
    std::string why;
    if (const int status = check_bearer(req[http::field::authorization], ctx_.token, why)) return refuse(status, why);
    instructor = true;
  }
  stream_.expires_never();
  std::make_shared<WebsocketSession>(stream_.release_socket(), ctx_, instructor, slot_)->run(std::move(req));
}

void HttpSession::handle(Request&& req) {
  const unsigned version = req.version();
  const bool keep = req.keep_alive();
  auto reply = [&](int status, std::string body) { send(json_response(version, keep, status, std::move(body))); };
  const Target t = parse_target(req.target());
  if (!t.ok) return reply(400, error_json("malformed percent-encoding in the request target"));
  const std::string& path = t.path;
  const auto method = req.method();

  auto method_not_allowed = [&](const char* allow) {
    Response res = json_response(version, keep, 405, error_json(std::string("method not allowed; use ") + allow));
    res.set(http::field::allow, allow);
    send(std::move(res));
  };
  // Anything that changes the simulation, or takes the server's spare cores, needs the
  // instructor token; `why` says which, in words a trainee can act on.
  auto authorized = [&](const char* why = kChanges) {
    if (!req.count(http::field::authorization)) {
      reply(401, error_json(std::string(why) + ": send the instructor token as 'Authorization: Bearer TOKEN'"));
      return false;
    }
    std::string refused;
    if (const int status = check_bearer(req[http::field::authorization], ctx_.token, refused)) {
      reply(status, error_json(refused));
      return false;
    }
    return true;
  };

  if (path == "/healthz") {
    if (method != http::verb::get) return method_not_allowed("GET");
    return reply(200, json{{"status", "ok"}, {"paused", ctx_.live->paused()}, {"clients", ctx_.counters.clients.load()}}.dump());
  }
  if (path == "/metrics") {
    if (method != http::verb::get) return method_not_allowed("GET");
    Response res{http::status::ok, version};
    res.set(http::field::content_type, "text/plain; version=0.0.4; charset=utf-8");
    res.set(http::field::cache_control, "no-store");
    res.keep_alive(keep);
    res.body() = metrics_text(ctx_);
    res.prepare_payload();
    return send(std::move(res));
  }
  if (path.rfind("/api/", 0) == 0) {
    if (path == "/api/v1/state") {
      if (method != http::verb::get) return method_not_allowed("GET");
      auto done = later(req);
      ctx_.live->state([done](std::string s) { done(200, std::move(s)); });
      return;
    }
    if (path == "/api/v1/role") {
      if (method != http::verb::get) return method_not_allowed("GET");
      if (!req.count(http::field::authorization)) return reply(200, json{{"role", "viewer"}}.dump());
      if (!authorized()) return;
      return reply(200, json{{"role", "instructor"}}.dump());
    }
    if (path == "/api/v1/scenario") {
      if (method == http::verb::get) {
        auto done = later(req);
        ctx_.live->scenario([done](std::string s) { done(200, std::move(s)); });
        return;
      }
      if (method != http::verb::put) return method_not_allowed("GET, PUT");
      if (!authorized()) return;
      LoadResult r = parse_scenario(req.body());
      if (!r.system) return reply(400, error_json("invalid scenario; nothing changed", issue_texts(r.issues)));
      auto done = later(req);
      ctx_.live->load(std::move(*r.system), [done](LiveSession::Reply rep) { done(rep.status, std::move(rep.body)); });
      return;
    }
    if (path == "/api/v1/commands") {
      if (method != http::verb::post) return method_not_allowed("POST");
      if (!authorized()) return;
      CommandParse cp = parse_commands(req.body());
      if (!cp.issues.empty()) return reply(400, error_json("invalid command; nothing applied", issue_texts(cp.issues)));
      auto done = later(req);
      ctx_.live->apply(std::move(cp.commands), [done](LiveSession::Reply rep) { done(rep.status, std::move(rep.body)); });
      return;
    }
    if (path == "/api/v1/control") {
      if (method != http::verb::post) return method_not_allowed("POST");
      if (!authorized()) return;
      std::string bad;
      const auto parsed = parse_untrusted_json(req.body(), bad);
      if (!parsed) return reply(400, error_json(bad));
      const json& j = *parsed;
      if (!j.is_object() || !j.contains("action") || !j["action"].is_string())
        return reply(400, error_json("body must be {\"action\": \"pause\" | \"resume\" | \"reset\" | \"speed\", \"speed\": x}"));
      const std::string action = j["action"].get<std::string>();
      auto done = later(req);
      auto cb = [done](LiveSession::Reply rep) { done(rep.status, std::move(rep.body)); };
      if (action == "pause") return ctx_.live->pause(cb);
      if (action == "resume") return ctx_.live->resume(cb);
      if (action == "reset") return ctx_.live->reset(cb);
      if (action == "speed") {
        if (!j.contains("speed") || !j["speed"].is_number())
          return reply(400, error_json("speed: required, a number from 0.1 to 100"));
        const double s = j["speed"].get<double>();
        if (!(s >= 0.1 && s <= 100.0))
          return reply(400, error_json("speed: must lie within [0.1, 100], got " + fmt_num(s)));
        return ctx_.live->set_speed(s, cb);
      }
      return reply(400, error_json("action: must be one of \"pause\", \"resume\", \"reset\", \"speed\", got \"" + action + "\""));
    }
    if (path == "/api/v1/history") {
      if (method != http::verb::get) return method_not_allowed("GET");
      double from = 0, to = 0, every = 0;
      std::string err;
      if (!query_number(t, "from_s", -1e300, from, err) || !query_number(t, "to_s", 1e300, to, err) ||
          !query_number(t, "every_s", 0.0, every, err))
        return reply(400, error_json(err));
      const std::string format = t.get("format", "json");
      if (format != "json" && format != "csv")
        return reply(400, error_json("query parameter format: must be json or csv, got " + quote_cut(format)));
      if (every < 0) return reply(400, error_json("query parameter every_s: must be >= 0"));
      if (from > to) return reply(400, error_json("query parameters: from_s must not lie after to_s"));
      const bool csv = format == "csv";
      Response res{http::status::ok, version};
      res.set(http::field::content_type, csv ? "text/csv; charset=utf-8" : "application/json");
      res.set(http::field::cache_control, "no-store");
      res.keep_alive(keep);
      res.body() = ctx_.live->history(from, to, every, csv);
      res.prepare_payload();
      return send(std::move(res));
    }
    if (path == "/api/v1/events") {
      if (method != http::verb::get) return method_not_allowed("GET");
      double since = 0;
      std::string err;
      if (!query_number(t, "since", 0, since, err)) return reply(400, error_json(err));
      if (!(since >= 0 && since <= 9007199254740992.0 && since == std::floor(since)))
        return reply(400, error_json("query parameter since: must be a whole number from 0 to 2^53, got " + fmt_num(since)));
      return reply(200, ctx_.live->events(static_cast<std::uint64_t>(since)));
    }
    if (path == "/api/v1/replays") {
      if (method != http::verb::post) return method_not_allowed("POST");
      LoadResult r = parse_scenario(req.body());
      if (!r.system) return reply(400, error_json("invalid scenario", issue_texts(r.issues)));
      const SystemDef& sd = r.system->def();
      const double unit_steps = sd.duration_s / sd.step_s * static_cast<double>(std::max<std::size_t>(1, sd.units.size()));
      if (unit_steps > ctx_.options.max_replay_unit_steps) {
        ctx_.counters.replays_refused.fetch_add(1);
        return reply(413, error_json("replay too large: " + fmt_num(unit_steps) + " unit-steps (duration_s / step_s * units), at most " +
                                     fmt_num(ctx_.options.max_replay_unit_steps)));
      }
      if (ctx_.counters.replays_active.fetch_add(1) >= ctx_.options.max_replays) {
        ctx_.counters.replays_active.fetch_sub(1);
        ctx_.counters.replays_refused.fetch_add(1);
        Response res = json_response(version, keep, 429, error_json("too many replays at once (at most " +
                                                                     std::to_string(ctx_.options.max_replays) + "); retry later"));
        res.set(http::field::retry_after, "2");
        return send(std::move(res));
      }
      std::vector<Issue> warnings;
      for (const Issue& i : r.issues)
        if (i.warning) warnings.push_back(i);
      auto done = later(req);
      net::post(*ctx_.replay_pool, [this, system = std::move(*r.system), warnings, done, self = shared_from_this()] {
        cli::RunOutcome out = cli::run_to_strings(system, warnings);
        ctx_.counters.replays_active.fetch_sub(1);
        ctx_.counters.replays.fetch_add(1);
        if (!out.ok) return done(400, error_json("invalid scenario", issue_texts(out.issues)));
        // The summary goes in as it is written to summary.json, the series as one CSV string.
        std::string body = "{\"summary\":" + out.summary + ",\"series\":" + json(out.series).dump() + "}";
        done(200, std::move(body));
      });
      return;
    }
    if (path == "/api/v1/sweeps") {
      // {"scenario": {...} (default: the loaded one), "vary": ["PATH=VALUES", ...],
      //  "sample": N, "seed": S, "metric": "nadir_hz"}: a job; answers 202 with its id.
      if (method != http::verb::post) return method_not_allowed("POST");
      if (!authorized(kSweeps)) return;
      std::string bad;
      const auto body_json = parse_untrusted_json(req.body(), bad);
      if (!body_json) return reply(400, error_json(bad));
      const json& j = *body_json;
      if (!j.is_object()) return reply(400, error_json("body must be a JSON object with \"vary\": [\"PATH=VALUES\", ...]"));
      study::SweepSpec spec;
      std::vector<std::string> problems;
      for (auto it = j.begin(); it != j.end(); ++it)
        if (it.key() != "scenario" && it.key() != "vary" && it.key() != "sample" && it.key() != "seed" && it.key() != "metric")
          problems.push_back(quote_cut(it.key()) + ": unknown field (expected scenario, vary, sample, seed, metric)");
      if (!j.contains("vary") || !j["vary"].is_array() || j["vary"].empty()) problems.push_back("vary: required, a list of \"PATH=VALUES\"");
      else
        for (const auto& v : j["vary"]) {
          std::string err;
          auto parsed = v.is_string() ? study::parse_vary(v.get<std::string>(), err) : std::nullopt;
          if (!parsed) problems.push_back(v.is_string() ? err : "vary: each entry must be a string PATH=VALUES");
          else spec.vary.push_back(std::move(*parsed));
        }
      if (j.contains("sample")) {
        if (!j["sample"].is_number_unsigned() || j["sample"].get<std::uint64_t>() == 0) problems.push_back("sample: must be a whole number >= 1");
        else spec.sample = j["sample"].get<std::uint64_t>();
      }
      if (j.contains("seed")) {
        if (!j["seed"].is_number_unsigned()) problems.push_back("seed: must be a whole number >= 0");
        else spec.seed = j["seed"].get<std::uint64_t>();
      }
      std::string metric = "nadir_hz";
      if (j.contains("metric")) {
        const auto& names = study::metric_names();
        if (!j["metric"].is_string()) problems.push_back("metric: must be a string, the name of a metric");
        else if (metric = j["metric"].get<std::string>(); std::find(names.begin(), names.end(), metric) == names.end())
          problems.push_back("metric: unknown metric " + quote_cut(metric));
      }
      if (j.contains("scenario") && !j["scenario"].is_object()) problems.push_back("scenario: must be an object (a scenario)");
      if (problems.empty()) {  // members bounded: each one is a whole run
        double members = 1;
        for (const auto& v : spec.vary) members *= static_cast<double>(v.values.size());
        if (spec.sample) members = std::min(members, static_cast<double>(*spec.sample));
        if (members > kMaxSweepMembers)
          problems.push_back("the sweep has " + fmt_num(members) + " members, at most " + fmt_num(kMaxSweepMembers) +
                             " over HTTP: use sample, or `droopline sweep` on the command line");
      }
      if (!problems.empty()) return reply(400, error_json("sweep refused", problems));
      spec.threads = std::max(1u, std::thread::hardware_concurrency() - 1);  // one core left to the loop
      auto done = later(req);
      auto start = [this, spec = std::move(spec), metric, done, self = shared_from_this()](std::string scenario_text) mutable {
        LoadResult r = parse_scenario(scenario_text);
        if (!r.system) return done(400, error_json("invalid scenario", issue_texts(r.issues)));
        spec.scenario = scenario_to_json(r.system->def());
        // Each axis at its smallest and largest value must give a valid scenario: an absurd
        // value is refused now, not found in every row later.
        for (const auto& v : spec.vary)
          for (double x : {*std::min_element(v.values.begin(), v.values.end()), *std::max_element(v.values.begin(), v.values.end())}) {
            json probe = spec.scenario;
            std::string err;
            if (!study::set_path(probe, v.path, x, err)) return done(400, error_json("vary " + err));
            LoadResult pr = parse_scenario(probe.dump());
            if (!pr.system) return done(400, error_json("vary " + v.path + "=" + fmt_num(x) + " gives an invalid scenario", issue_texts(pr.issues)));
          }
        std::string err;
        auto job = ctx_.sweeps.submit(std::move(spec), metric, err);
        if (!job) return done(429, error_json(err));
        done(202, SweepJobs::status_json(*job).dump());
      };
      if (j.contains("scenario")) return start(j["scenario"].dump());
      ctx_.live->scenario(std::move(start));
      return;
    }
    if (path.rfind("/api/v1/sweeps/", 0) == 0) {
      std::string id = path.substr(15);
      const bool result = id.size() > 7 && id.compare(id.size() - 7, 7, "/result") == 0;
      if (result) id.resize(id.size() - 7);
      auto job = ctx_.sweeps.find(id);
      if (!job) return reply(404, error_json("no sweep job " + quote_cut(id) + " (finished jobs are kept until 16 newer ones)"));
      if (!result && method == http::verb::delete_) {
        if (!authorized(kSweeps)) return;
        job->cancel = true;
        return reply(200, SweepJobs::status_json(*job).dump());
      }
      if (method != http::verb::get) return method_not_allowed(result ? "GET" : "GET, DELETE");
      if (!result) return reply(200, SweepJobs::status_json(*job).dump());
      if (!job->finished.load(std::memory_order_acquire)) return reply(409, error_json("sweep " + id + " is still running"));
      if (job->status == "failed") return reply(409, error_json("sweep " + id + " failed: " + job->error));
      const std::string format = t.get("format", "json");
      if (format != "json" && format != "csv" && format != "svg")
        return reply(400, error_json("query parameter format: must be json, csv or svg, got \"" + format + "\""));
      if (format == "svg" && job->svg.empty()) return reply(404, error_json("no plot: it needs one or two varied fields"));
      Response res{http::status::ok, version};
      res.set(http::field::content_type, format == "json" ? "application/json" : format == "csv" ? "text/csv; charset=utf-8" : "image/svg+xml");
      res.keep_alive(keep);
      res.body() = format == "json" ? job->result.dump() : format == "csv" ? job->csv : job->svg;
      res.prepare_payload();
      return send(std::move(res));
    }
    if (path == "/api/v1/record") {
      if (method != http::verb::get) return method_not_allowed("GET");
      double from = 0, to = 0;
      std::string err;
      if (!query_number(t, "from_s", 0.0, from, err) || !query_number(t, "to_s", 1e300, to, err)) return reply(400, error_json(err));
      const std::string part = t.get("part", "cfg");
      if (part != "cfg" && part != "dat") return reply(400, error_json("query parameter part: must be cfg or dat, got \"" + part + "\""));
      if (!(from < to)) return reply(400, error_json("query parameters: from_s must lie before to_s"));
      study::ComtradeRecord rec = ctx_.live->record(from, to);
      if (!rec.error.empty()) return reply(404, error_json(rec.error + " (the history holds the last " + fmt_num(ctx_.options.history_s) + " s)"));
      Response res{http::status::ok, version};
      res.set(http::field::content_type, "text/plain; charset=us-ascii");
      res.set(http::field::content_disposition, "attachment; filename=\"droopline-record." + part + "\"");
      res.set(http::field::cache_control, "no-store");
      res.keep_alive(keep);
      res.body() = part == "cfg" ? std::move(rec.cfg) : std::move(rec.dat);
      res.prepare_payload();
      return send(std::move(res));
    }
    if (path == "/api/v1/assess") {
      // A requirements file (the body) checked against a run of the loaded scenario, on the workers.
      if (method != http::verb::post) return method_not_allowed("POST");
      std::vector<Issue> issues;
      auto req_def = study::parse_requirements(req.body(), issues);
      if (!req_def) return reply(400, error_json("invalid requirements", issue_texts(issues)));
      if (ctx_.counters.replays_active.fetch_add(1) >= ctx_.options.max_replays) {
        ctx_.counters.replays_active.fetch_sub(1);
        return reply(429, error_json("too many runs at once; retry later"));
      }
      auto done = later(req);
      ctx_.live->scenario([this, done, requirements = std::move(*req_def), self = shared_from_this()](std::string text) {
        net::post(*ctx_.replay_pool, [this, done, requirements, text = std::move(text), self] {
          LoadResult r = parse_scenario(text);
          std::string body;
          if (r.system) body = study::assessment_to_json(study::assess(r.system->def(), requirements), requirements).dump();
          ctx_.counters.replays_active.fetch_sub(1);
          if (!r.system) return done(400, error_json("invalid scenario", issue_texts(r.issues)));
          done(200, std::move(body));
        });
      });
      return;
    }
    if (path == "/api/v1/modes") {
      // The small-signal modes of the live scenario (GET) or of a posted one (POST), computed on
      // the replay workers so neither the loop nor the network thread waits for the solver.
      if (method != http::verb::get && method != http::verb::post) return method_not_allowed("GET, POST");
      double threshold = 0.05;
      std::string err;
      if (!query_number(t, "damping_threshold", 0.05, threshold, err)) return reply(400, error_json(err));
      if (!(threshold >= 0.0 && threshold <= 1.0))
        return reply(400, error_json("query parameter damping_threshold: must lie within [0, 1], got " + fmt_num(threshold)));
      auto done = later(req);
      auto analyse = [this, threshold, done, self = shared_from_this()](std::string scenario_text) {
        net::post(*ctx_.replay_pool, [threshold, done, text = std::move(scenario_text)] {
          LoadResult r = parse_scenario(text);
          if (!r.system) return done(400, error_json("invalid scenario", issue_texts(r.issues)));
          study::ModesOptions opt;
          opt.damping_threshold = threshold;
          const study::ModesResult m = study::small_signal(r.system->def(), opt);
          if (!m.error.empty()) return done(422, error_json(m.error));
          done(200, study::modes_to_json(m, opt).dump());
        });
      };
      if (method == http::verb::post) return analyse(req.body());
      ctx_.live->scenario(analyse);
      return;
    }
    if (path == "/api/v1/openapi.json") {
      if (method != http::verb::get) return method_not_allowed("GET");
      return serve_file(req, "/openapi.json");
    }
    if (path == "/api/v1/stream") return reply(426, error_json("/api/v1/stream is a WebSocket: send an upgrade request"));
    return reply(404, error_json("no API endpoint " + quote_cut(path)));
  }

  // Everything else is one of the page's files, or nothing.
  if (method != http::verb::get && method != http::verb::head) return method_not_allowed("GET, HEAD");
  serve_file(req, path);
}

void HttpSession::serve_file(const Request& req, const std::string& path) {
  const unsigned version = req.version();
  const bool keep = req.keep_alive();
  const StaticFiles::Lookup found = ctx_.files->resolve(path);
  if (found.status != 200)
    return send(json_response(version, keep, found.status, error_json("not served: " + quote_cut(path) + " (" + found.error + ")")));
  beast::error_code ec;
  http::file_body::value_type body;
  body.open(found.file.c_str(), beast::file_mode::scan, ec);
  if (ec) return send(json_response(version, keep, 404, error_json("not served: " + quote_cut(path) + " (cannot be opened)")));
  auto headers = [&](auto& res) {
    res.set(http::field::server, "droopline");
    res.set(http::field::content_type, content_type_of(found.file));
    res.set(http::field::cache_control, found.file.extension() == ".html" ? "no-cache" : "public, max-age=300");
    res.set("X-Content-Type-Options", "nosniff");
    res.keep_alive(keep);
  };
  if (req.method() == http::verb::head) {
    http::response<http::empty_body> res{http::status::ok, version};
    headers(res);
    res.content_length(body.size());
    return send(std::move(res));
  }
  http::response<http::file_body> res{std::piecewise_construct, std::make_tuple(std::move(body)),
                                      std::make_tuple(http::status::ok, version)};
  headers(res);
  res.prepare_payload();
  send(std::move(res));
}

}  // namespace droopline::server
