#pragma once
// The service's API without the network: a Request (verb, target, body, role) goes through one
// route table to a handler that answers with a Reply (status, type, body, extra headers). HTTP
// requests and WebSocket control messages both come through here, so one route, one role rule
// and one set of messages serve both. Handlers answer later, from any thread, through `Respond`.
#include <functional>
#include <initializer_list>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "http_target.hpp"
#include "seats.hpp"
#include "droopline/debrief.hpp"
#include "services.hpp"
#include "typed_text.hpp"

namespace droopline::server {

/// Who is asking, least first: `viewer` needs no token, `seat` proved a seat's join code (it may act
/// on its own areas only), `instructor` proved the instructor token.
enum class Role { viewer, seat, instructor };
/// "viewer", "seat", "instructor".
const char* role_name(Role role);

/// The request methods the API routes.
enum class Verb { get, head, post, put, delete_, other };

/// "GET", "POST", ... (the route table's and openapi.json's spelling, upper case).
const char* verb_name(Verb verb);

/// One request to the API, whichever transport carried it.
struct Request {
  Verb verb = Verb::get;     ///< the method
  std::string target;        ///< path and query, as sent
  std::string body;          ///< the request body (JSON for every route that reads one)
  Role role = Role::viewer;  ///< the role already proven (a WebSocket that sent its token or code)
  std::optional<SeatIdentity> seat;  ///< role seat: which seat (proven on the WebSocket)
  /// The HTTP Authorization header, if any: checked in the dispatch (a refused one answers 401/403).
  std::optional<std::string> authorization;
  /// How a viewer proves the instructor token on this transport (quoted in a 401).
  std::string token_hint = "send the instructor token as 'Authorization: Bearer TOKEN'";
};

/// The answer: an HTTP status, a content type and the body, or a page file to serve.
struct Reply {
  int status = 200;                                          ///< the HTTP status
  std::string type = "application/json";                     ///< the content type
  std::string body;                                          ///< the body (JSON unless `type` says otherwise)
  std::vector<std::pair<std::string, std::string>> headers;  ///< extra headers (Retry-After, ...)
  std::string file;  ///< non-empty: serve this page file instead (the network layer's StaticFiles decides)
};

/// Receives the reply (from any thread, exactly once).
using Respond = std::function<void(Reply)>;

/// One request being answered: what the handler reads and how it answers.
struct Call {
  const Request& request;           ///< valid during the handler's synchronous part only
  Target target;                    ///< the decoded path and query
  std::vector<std::string> params;  ///< the `{...}` segments of the route's pattern, in order
  Role role = Role::viewer;         ///< the caller's role after the token check
  std::optional<SeatIdentity> seat;  ///< role seat: which seat, its name and areas
  int refused_status = 0;           ///< a token was offered and refused: 401 or 403 (else 0)
  std::string refused;              ///< why it was refused
  Respond respond;                  ///< answers (copy it into work that finishes later)
  /// Answers with a JSON body.
  void reply(int status, std::string json_body) const;
  /// Answers with an error body ({"error": ..., "issues": [...]}).
  void error(int status, const std::string& message, const std::vector<std::string>& issues = {}) const;
};

/// One entry of the route table.
struct Route {
  Verb verb;                                      ///< the method it answers
  std::string pattern;                            ///< the path; `{name}` matches one segment
  Role role;                                      ///< the least role allowed
  const char* why;                                ///< for seat and instructor routes: why, in words a trainee can act on
  std::function<void(Services&, Call&)> handler;  ///< answers through `Call::respond`, now or later
  std::vector<std::string> query = {};            ///< the query parameters it reads; any other is refused
};

/// The whole route table, in order (handlers take the services they work on).
std::vector<Route> route_table();

/// What a caller proved: a role, the seat for role seat, or why an offered proof was refused.
struct Proof {
  Role role = Role::viewer;
  std::optional<SeatIdentity> seat;
  int refused_status = 0;  ///< a token or code was offered and refused: 401 or 403 (else 0)
  std::string refused;     ///< why
};

/// Checks a token or join code as given (the WebSocket `auth` message, the bearer of a header):
/// the instructor token, else a seat's code, else refused with 403.
Proof prove(std::string_view given, const std::string& token, SeatRoster& seats);

/// The caller's role: `req.role`/`req.seat`, or what a valid Authorization header proves (the
/// instructor token or a seat's join code); a header that is offered and refused sets
/// `refused_status` (401 or 403) and `refused` (why).
Proof role_of(const Request& req, const std::string& token, SeatRoster& seats);

/// Reads `Authorization: Bearer TOKEN` (the scheme in any case, RFC 9110): 0 with the token in
/// `given`, else 401 with `why` (not a bearer token, or none after the scheme).
int read_bearer(std::string_view header, std::string& given, std::string& why);

/// The route table and its dispatch (role check included): the API of `droopline serve`.
class Api {
 public:
  explicit Api(Services& services);
  /// Answers `req` through `respond`; false (nothing answered) when the path is not the API's
  /// (then it is one of the page's files).
  bool handle(const Request& req, Respond respond);
  /// The route table, in order.
  const std::vector<Route>& routes() const { return routes_; }
  /// The table as JSON text, `[{"verb", "path", "role"}, ...]` (for the test against openapi.json).
  std::string table_json() const;

 private:
  Services& services_;
  std::vector<Route> routes_;
};

/// An error reply body, {"error": ..., "issues": [...]}. Messages may quote what a client sent:
/// each is clipped (clip_text), and at most 200 issues are listed.
std::string error_json(const std::string& message, const std::vector<std::string>& issues = {});

/// A client-supplied text quoted in a message: printable ASCII, cut to 120 characters, in quotes.
std::string quote_cut(std::string_view text);

/// The refusal of the first query parameter of `t` that `reads` does not list ("" when every one
/// is read): routes through Api::handle, the stream's upgrade (`kStreamQuery`) through HttpSession.
std::string unread_query(const Target& t, const std::vector<std::string>& reads, const std::string& route);
/// The query parameters the stream reads (its route and its upgrade).
inline const std::vector<std::string> kStreamQuery = {"history_s"};

/// The decimal number `key` of the query (`fallback` when absent); false with `error` naming the
/// parameter when it is not a finite decimal number.
bool query_number(const Target& t, const std::string& key, double fallback, double& out, std::string& error);

/// Appends a problem `where"key": unknown field (expected a, b, c)` for each field of the object
/// `j` outside `known` (the body routes refuse what they would otherwise ignore).
void unknown_fields(const nlohmann::ordered_json& j, std::initializer_list<std::string_view> known,
                    std::vector<std::string>& problems, const std::string& where = "");

/// The error texts of `issues` (warnings left out).
std::vector<std::string> issue_texts(const std::vector<Issue>& issues);

/// The one string field `rule.field` of a JSON object body (no other field), checked as typed
/// text by `rule` (live_routes.cpp); nullopt when the call was answered 400.
std::optional<std::string> typed_body(const Call& c, const TypedTextRule& rule);

/// The routes of the live session (state, scenario, commands, control, history, events, record,
/// role, healthz, metrics, stream, openapi).
void add_live_routes(std::vector<Route>& routes);
/// The routes that run studies on the worker pool (replays, sweeps, modes, assess).
void add_study_routes(std::vector<Route>& routes);
/// The debrief of a run of the live session's journal (GET /api/v1/debrief, the instructor's).
void add_debrief_routes(std::vector<Route>& routes);
/// The training records' routes (records_routes.cpp, the instructor's).
void add_records_routes(std::vector<Route>& routes);
/// The routes of fit jobs and injection tests (fit_routes.cpp, the instructor's).
void add_fit_routes(std::vector<Route>& routes);
/// The study job of `kind` named by the route's {id}; nullptr with a 404 answered.
std::shared_ptr<StudyJobs::Job> find_job(Services& s, const Call& c, const std::string& kind);
/// The same job once finished with a result; nullptr with a 404 or 409 answered (running, failed).
std::shared_ptr<StudyJobs::Job> finished_job(Services& s, const Call& c, const std::string& kind);
/// Answers a job just submitted: 202 with its status and a Location to poll, or 429 with `error`
/// and a Retry-After when the job table is full (`job` null).
void answer_submitted(const Respond& respond, const std::shared_ptr<StudyJobs::Job>& job, const std::string& error);
/// Sets a running job's cancel flag and answers its status (DELETE); 409 once it has finished, or a 404.
void cancel_job(Services& s, const Call& c, const std::string& kind);
/// `{"jobs": [status, ...]}` of the jobs of `kind` still held, newest first.
void list_jobs(Services& s, const Call& c, const std::string& kind);
/// Takes one of the worker pool's run slots (replays, assessments, debriefs, fit checks and
/// injection tests share `Options::max_replays` of them), or answers 429 with `busy` and a
/// Retry-After and returns false. The caller gives the slot back before it answers.
bool take_run_slot(Services& s, const Call& c, const std::string& busy);
/// Answers with the debrief of run `run` ("" = the last) of the journal at `path`, built on the
/// worker pool within the replay limit (429 beyond it); `extras` from the training records.
void respond_with_debrief(Services& s, Call& c, std::string path, std::string run, study::DebriefExtras extras);

}  // namespace droopline::server
