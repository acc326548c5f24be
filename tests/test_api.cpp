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
    const bool instructor = r.role == Role::instructor;
    CHECK(op.value("x-role", "") == (instructor ? "instructor" : "viewer"));
    REQUIRE(op.contains("security"));
    CHECK(op["security"].empty() == !instructor);
    if (instructor) {
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

TEST_CASE("the dispatch refuses a viewer on every instructor route, before the handler runs") {
  Services services;  // no live session: a handler that ran would crash
  Api api(services);
  for (const Route& r : api.routes()) {
    if (r.role != Role::instructor) continue;
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
  CHECK(put.headers[0].second == "GET");
  CHECK(dispatch(api, Verb::delete_, "/api/v1/scenario").headers[0].second == "GET, PUT");
  CHECK(dispatch(api, Verb::post, "/api/v1/sweeps/1/result").headers[0].second == "GET");
  CHECK(dispatch(api, Verb::get, "/api/v1/nothing").status == 404);
  CHECK(dispatch(api, Verb::get, "/api/v1/stream").status == 426);
  CHECK(dispatch(api, Verb::get, "/api/v1/openapi.json").file == "/openapi.json");
  CHECK(dispatch(api, Verb::get, "/api/v1/state%zz").status == 400);
  Request page;
  page.target = "/index.html";
  CHECK_FALSE(api.handle(page, [](Reply) {}));
}
