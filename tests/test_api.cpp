// The API's route table against web/openapi.json (every route documented with its role, nothing
// documented that is not routed), and the dispatch's answers that need no live session: the role
// check, 404 and 405.
#include <algorithm>
#include <catch2/catch.hpp>
#include <cctype>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <string>

#include "api.hpp"
#include "fit_request.hpp"

using namespace droopline::server;
using json = nlohmann::json;

namespace {

json openapi() {
  std::ifstream in(std::string(DROOPLINE_SOURCE_DIR) + "/web/openapi.json");
  REQUIRE(in);
  return json::parse(in);
}

std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

// The reply of a request answered on the spot (no live session behind it).
Reply dispatch(Api& api, Verb verb, const std::string& target, Role role = Role::viewer) {
  Request req;
  req.verb = verb;
  req.target = target;
  req.role = role;
  Reply out;
  out.status = 0;
  REQUIRE(api.handle(req, [&](Reply r) { out = std::move(r); }));
  return out;
}

}  // namespace

TEST_CASE("every route is documented in openapi.json with its role") {
  const json doc = openapi();
  for (const Route& r : route_table()) {
    INFO(verb_name(r.verb) << " " << r.pattern);
    REQUIRE(doc["paths"].contains(r.pattern));
    const json& paths = doc["paths"][r.pattern];
    REQUIRE(paths.contains(lower(verb_name(r.verb))));
    const json& op = paths[lower(verb_name(r.verb))];
    const bool guarded = r.role != Role::viewer;
    CHECK(op.value("x-role", "") == role_name(r.role));
    REQUIRE(op.contains("security"));
    CHECK(op["security"].empty() == !guarded);
    if (guarded) {
      CHECK(std::string(r.why).size() > 10);  // a 401 says why, in words a trainee can act on
      CHECK(op["responses"].contains("401"));
    }
  }
}

TEST_CASE("nothing is documented in openapi.json that is not routed") {
  std::set<std::pair<std::string, std::string>> routed;
  for (const Route& r : route_table()) routed.emplace(lower(verb_name(r.verb)), r.pattern);
  CHECK(routed.size() == route_table().size());  // no route twice
  const json doc = openapi();  // held: a range over a temporary's member would outlive it
  for (const auto& [path, ops] : doc["paths"].items())
    for (const auto& [verb, op] : ops.items()) {
      INFO(verb << " " << path);
      CHECK(routed.count({verb, path}) == 1);
    }
}

TEST_CASE("the dispatch refuses a viewer on every seat and instructor route, before the handler runs") {
  Services services;  // no live session: a handler that ran would crash
  Api api(services);
  for (const Route& r : api.routes()) {
    if (r.role == Role::viewer) continue;
    std::string target = r.pattern;
    if (auto at = target.find("{id}"); at != std::string::npos) target.replace(at, 4, "1");
    INFO(target);
    const Reply reply = dispatch(api, r.verb, target);
    CHECK(reply.status == 401);
    CHECK(reply.body.find(r.why) != std::string::npos);
  }
  Request wrong;
  wrong.verb = Verb::post;
  wrong.target = "/api/v1/commands";
  wrong.authorization = "Bearer not-the-token";
  services.token = "the-instructor-token";
  int status = 0;
  REQUIRE(api.handle(wrong, [&](Reply r) { status = r.status; }));
  CHECK(status == 403);
}

TEST_CASE("the dispatch answers 405 with Allow, 404 under /api/, and leaves page files alone") {
  Services services;
  Api api(services);
  const Reply put = dispatch(api, Verb::put, "/api/v1/state");
  CHECK(put.status == 405);
  REQUIRE(put.headers.size() == 1);
  CHECK(put.headers[0].second == "GET, HEAD");
  CHECK(dispatch(api, Verb::delete_, "/api/v1/scenario").headers[0].second == "GET, HEAD, PUT");
  CHECK(dispatch(api, Verb::post, "/api/v1/sweeps/1/result").headers[0].second == "GET, HEAD");
  // HEAD takes the GET route (the session drops the body); a route without GET refuses it.
  CHECK(dispatch(api, Verb::head, "/api/v1/openapi.json").file == "/openapi.json");
  CHECK(dispatch(api, Verb::head, "/api/v1/commands").status == 405);
  CHECK(dispatch(api, Verb::get, "/api/v1/nothing").status == 404);
  CHECK(dispatch(api, Verb::get, "/api/v1/stream").status == 426);
  CHECK(dispatch(api, Verb::get, "/api/v1/openapi.json").file == "/openapi.json");
  CHECK(dispatch(api, Verb::get, "/api/v1/state%zz").status == 400);
  Request page;
  page.target = "/index.html";
  CHECK_FALSE(api.handle(page, [](Reply) {}));
}

TEST_CASE("join codes: six characters without look-alikes, typed in any case, each naming one seat") {
  for (int i = 0; i < 200; ++i) {
    const std::string code = SeatRoster::draw_code();
    REQUIRE(code.size() == SeatRoster::kCodeLength);
    for (char ch : code) CHECK(SeatRoster::kAlphabet.find(ch) != std::string_view::npos);
    CHECK(code.find_first_of("01ILO") == std::string::npos);
  }
  SeatRoster roster;
  CHECK_FALSE(roster.any());
  roster.set({{"west", "West desk", {"vellmark"}}, {"east", "East desk", {"oskany", "dreyholt"}}});
  const auto seats = roster.list();
  REQUIRE(seats.size() == 2);
  CHECK(seats[0].join_code != seats[1].join_code);
  CHECK_FALSE(seats[1].joined);
  std::string typed = seats[1].join_code;
  for (char& ch : typed) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
  typed = " " + typed.substr(0, 3) + "-" + typed.substr(3) + " ";
  const auto east = roster.sign_in(typed);
  REQUIRE(east);
  CHECK(east->id == "east");
  CHECK(east->areas == std::vector<std::string>{"oskany", "dreyholt"});
  CHECK(roster.list()[1].joined);
  CHECK_FALSE(roster.list()[0].joined);
  CHECK_FALSE(roster.sign_in(seats[0].join_code.substr(0, 5)));
  CHECK_FALSE(roster.sign_in(""));
  // Loading another exercise draws new codes: the old ones stop working.
  const std::string old = seats[0].join_code;
  roster.set({{"west", "West desk", {"vellmark"}}});
  CHECK(roster.list()[0].join_code != old);  // 1 in 887 million to fail by chance
  CHECK_FALSE(roster.sign_in(seats[1].join_code));
}

TEST_CASE("the dispatch: a seat's code proves role seat, a seat on an instructor route gets 403 with the reason") {
  Services services;  // no live session: a handler that ran would crash (role and seats need none)
  services.token = "the-instructor-token";
  services.seats.set({{"west", "West desk", {"vellmark"}}});
  Api api(services);
  const std::string code = services.seats.list()[0].join_code;
  auto ask = [&](Verb verb, const std::string& target, std::optional<std::string> auth) {
    Request req;
    req.verb = verb;
    req.target = target;
    req.authorization = std::move(auth);
    Reply out;
    out.status = 0;
    REQUIRE(api.handle(req, [&](Reply r) { out = std::move(r); }));
    return out;
  };
  const Reply role = ask(Verb::get, "/api/v1/role", "Bearer " + code);
  CHECK(role.status == 200);
  CHECK(json::parse(role.body)["role"] == "seat");
  CHECK(json::parse(role.body)["seat"]["id"] == "west");
  for (const Route& r : api.routes()) {
    if (r.role != Role::instructor) continue;
    std::string target = r.pattern;
    if (auto at = target.find("{id}"); at != std::string::npos) target.replace(at, 4, "1");
    INFO(target);
    const Reply reply = ask(r.verb, target, "Bearer " + code);
    CHECK(reply.status == 403);
    CHECK(reply.body.find(r.why) != std::string::npos);
  }
  const Reply wrong = ask(Verb::get, "/api/v1/role", std::string("Bearer ZZZZZZ"));
  CHECK(wrong.status == 403);
  CHECK(wrong.body.find("neither the instructor token nor a seat's join code") != std::string::npos);
  const Reply seats = ask(Verb::get, "/api/v1/seats", std::string("Bearer the-instructor-token"));
  CHECK(seats.status == 200);
  CHECK(json::parse(seats.body)["seats"][0]["join_code"] == code);
  CHECK(json::parse(seats.body)["seats"][0]["joined"] == true);
}

// Base64 as RFC 4648 gives it: its section 10 test vectors (quoted from memory of the RFC).
TEST_CASE("base64 of posted binary records: RFC 4648 vectors and bad input with its offset", "[api]") {
  const std::vector<std::pair<std::string, std::string>> vectors{{"", ""},           {"Zg==", "f"},
                                                                 {"Zm8=", "fo"},     {"Zm9v", "foo"},
                                                                 {"Zm9vYg==", "foob"}, {"Zm9vYmE=", "fooba"},
                                                                 {"Zm9vYmFy", "foobar"}};
  for (const auto& v : vectors) {
    std::string err;
    const auto out = decode_base64(v.first, err);
    INFO(v.first << ": " << err);
    REQUIRE(out);
    CHECK(*out == v.second);
  }
  std::string err;
  CHECK(decode_base64("Zm9v\r\nYmFy", err) == std::optional<std::string>("foobar"));  // wrapped lines
  CHECK_FALSE(decode_base64("Zm9v YmFy", err));
  CHECK(err == "character \" \" at offset 4 is not base64");
  CHECK_FALSE(decode_base64("Zg==Zg==", err));
  CHECK(err == "character \"Z\" at offset 4 follows the padding");
  CHECK_FALSE(decode_base64("Zm9vY", err));
  CHECK(err.find("not a multiple of 4") != std::string::npos);
  CHECK_FALSE(decode_base64("Z===", err));
  CHECK(err == "character \"=\" at offset 1 is not base64");
}

// Each bad fit body is refused with its field named, before any scenario or job is involved.
TEST_CASE("fit bodies: every problem names its field", "[api]") {
  const json ok = {{"unit", "QH1"},
                   {"params", {"governor.droop=0.02:0.1"}},
                   {"recording", {{"format", "csv"}, {"text", "t_s,f\n0,50\n"}}}};
  auto problems_of = [](const json& body) {
    std::vector<std::string> problems;
    const auto req = read_fit_request(body.dump(), problems);
    CHECK(req.has_value() == problems.empty());
    std::string all;
    for (const auto& p : problems) all += p + "\n";
    return all;
  };
  CHECK(problems_of(ok).empty());
  const std::vector<std::pair<json, std::string>> table{
      {{{"/params", json::array({"governor.droop=0.1:0.02"})}}, "params[0]: governor.droop: LO (0.1) must be below HI (0.02)"},
      {{{"/params", json::array({"a=1:2", "b=nan:1"})}}, "params[1]: \"b=nan:1\": LO and HI must be numbers"},
      {{{"/params", json::array({"a=1:2", "a=1:3"})}}, "params[1]: \"a\" is given twice"},
      {{{"/params", json(std::vector<std::string>(9, "a=1:2"))}}, "params: required, a list of 1 to 8 \"PATH=LO:HI\", got 9"},
      {{{"/starts", 1000000}}, "starts: must be a whole number from 1 to 32"},
      {{{"/starts", 0}}, "starts: must be a whole number from 1 to 32"},
      {{{"/seed", -1}}, "seed: must be a whole number >= 0"},
      {{{"/threshold_hz", 0}}, "threshold_hz: must be a number from 0.001 to 5, got 0"},
      {{{"/threshold_hz", 1e-300}}, "threshold_hz: must be a number from 0.001 to 5, got 1e-300"},
      {{{"/unit", 5}}, "unit: must be a string, the id of a unit of the scenario, got number"},
      {{{"/unit", ""}}, "unit: required"},
      {{{"/scenario", "x"}}, "scenario: must be an object"},
      {{{"/extra", 1}}, "\"extra\": unknown field"},
      {{{"/recording", json{{"format", "xml"}}}}, "recording.format: must be \"csv\" or \"comtrade\""},
      {{{"/recording/base_mw", 100}}, "recording.base_hz: per-unit recordings need both base_mw and base_hz"},
      {{{"/recording/base_hz", 1e9}, {"/recording/base_mw", 1}}, "recording.base_hz: must be a number from 10 to 1000"},
      {{{"/recording", json{{"format", "comtrade"}, {"cfg", "x"}, {"dat_base64", "QUJD$"}}}},
       "recording.dat_base64: character \"$\" at offset 4 is not base64"},
      {{{"/recording", json{{"format", "comtrade"}, {"cfg", "x"}, {"dat", "1"}, {"dat_base64", "QUJD"}}}},
       "recording.dat: give exactly one of"},
      {{{"/recording", json{{"format", "comtrade"}, {"cfg", "x"}, {"dat", "1"}}}, {"/name", "record.txt"}},
       "name: a COMTRADE record's name ends in .cfg"},
  };
  for (const auto& row : table) {
    json body = ok;
    for (auto it = row.first.begin(); it != row.first.end(); ++it) body[json::json_pointer(it.key())] = it.value();
    INFO(body.dump());
    CHECK_THAT(problems_of(body), Catch::Contains(row.second));
  }
  std::vector<std::string> problems;
  CHECK_FALSE(read_fit_request("[1]", problems));
  CHECK_THAT(problems.at(0), Catch::Contains("body: must be a JSON object"));
}
