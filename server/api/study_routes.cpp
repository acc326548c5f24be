// The routes that run simulations on the server's worker pool or sweep threads: replays, sweeps,
// small-signal modes and requirement checks. All of them are the instructor's: a stranger on the
// LAN must not be able to occupy the cores the live session leaves spare.
#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>

#include "api.hpp"
#include "droopline/assess.hpp"
#include "droopline/batch.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/modes.hpp"
#include "droopline/scenario_io.hpp"
#include "droopline/sweep.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

constexpr double kMaxSweepMembers = 100000;  // runs in one sweep job
// Why a route needs the instructor token, in words a trainee can act on.
constexpr const char* kSweeps = "sweeps are for the instructor (a sweep job runs on the server's spare cores)";
constexpr const char* kWorkers =
    "replays, mode analyses and requirement checks are for the instructor (they run on the server's worker pool)";

// A JSON answer handed from a worker.
void answer(const Respond& respond, int status, std::string body) {
  respond(Reply{status, "application/json", std::move(body), {}, {}});
}

void replays(Services& s, Call& c) {
  LoadResult r = parse_scenario(c.request.body);
  if (!r.system) return c.error(400, "invalid scenario", issue_texts(r.issues));
  const double unit_steps = r.system->def().duration_s / r.system->def().step_s *
                            static_cast<double>(std::max<std::size_t>(1, r.system->def().units.size()));
  if (unit_steps > s.options.max_replay_unit_steps) {
    s.counters.replays_refused.fetch_add(1);
    return c.error(413, "replay too large: " + fmt_num(unit_steps) +
                            " unit-steps (duration_s / step_s * units), at most " +
                            fmt_num(s.options.max_replay_unit_steps));
  }
  if (!take_run_slot(s, c,
                     "too many replays at once (at most " + std::to_string(s.options.max_replays) + "); retry later")) {
    s.counters.replays_refused.fetch_add(1);
    return;
  }
  std::vector<Issue> warnings;
  for (const Issue& i : r.issues)
    if (i.warning) warnings.push_back(i);
  s.run_on_workers([&s, system = std::move(*r.system), warnings, respond = c.respond] {
    study::RunOutcome out = study::run_to_strings(system, warnings, &s.stopping);
    s.counters.replays_active.fetch_sub(1);
    s.counters.replays.fetch_add(1);
    if (out.stopped)
      return answer(respond, 503,
                    error_json("the service is stopping: the replay was ended at t = " + fmt_num(out.stopped_at_s) +
                               " s, before the end of its scenario"));
    if (!out.ok) return answer(respond, 400, error_json("invalid scenario", issue_texts(out.issues)));
    // The summary goes in as it is written to summary.json, the series as one CSV string.
    answer(respond, 200, "{\"summary\":" + out.summary + ",\"series\":" + json(out.series).dump() + "}");
  });
}

// The sweep asked for in `j`, or the problems with it.
std::vector<std::string> read_sweep(const json& j, study::SweepSpec& spec, std::string& metric) {
  std::vector<std::string> problems;
  unknown_fields(j, {"scenario", "vary", "sample", "seed", "metric"}, problems);
  if (!j.contains("vary") || !j["vary"].is_array() || j["vary"].empty()) {
    problems.push_back("vary: required, a list of \"PATH=VALUES\"");
  } else if (std::any_of(j["vary"].begin(), j["vary"].end(), [](const json& v) { return !v.is_string(); })) {
    problems.push_back("vary: each entry must be a string PATH=VALUES");
  } else {
    // The limits on fields and values are checked as the entries are read, before any is expanded.
    std::string err;
    auto parsed = study::parse_varies(j["vary"].get<std::vector<std::string>>(), err);
    if (err.rfind("--vary ", 0) == 0) err.erase(0, 7);  // the command line's option, not a field here
    if (!parsed)
      problems.push_back("vary: " + err);
    else
      spec.vary = std::move(*parsed);
  }
  if (j.contains("sample")) {
    if (!j["sample"].is_number_unsigned() || j["sample"].get<std::uint64_t>() == 0)
      problems.push_back("sample: must be a whole number >= 1");
    else
      spec.sample = j["sample"].get<std::uint64_t>();
  }
  if (j.contains("seed")) {
    if (!j["seed"].is_number_unsigned())
      problems.push_back("seed: must be a whole number >= 0");
    else
      spec.seed = j["seed"].get<std::uint64_t>();
  }
  if (j.contains("metric")) {
    const auto& names = study::metric_names();
    if (!j["metric"].is_string())
      problems.push_back("metric: must be a string, the name of a metric");
    else if (metric = j["metric"].get<std::string>(); std::find(names.begin(), names.end(), metric) == names.end())
      problems.push_back("metric: unknown metric " + quote_cut(metric));
  }
  if (j.contains("scenario") && !j["scenario"].is_object())
    problems.push_back("scenario: must be an object (a scenario)");
  if (problems.empty()) {  // members bounded: each one is a whole run
    double members = 1;
    for (const auto& v : spec.vary) members *= static_cast<double>(v.values.size());
    if (spec.sample) members = std::min(members, static_cast<double>(*spec.sample));
    if (members > kMaxSweepMembers)
      problems.push_back("the sweep has " + fmt_num(members) + " members, at most " + fmt_num(kMaxSweepMembers) +
                         " over HTTP: use sample, or `droopline sweep` on the command line");
  }
  return problems;
}

// A sweep job's work: the rows, their CSV and, for one or two varied fields, the plot.
void run_sweep_job(const study::SweepSpec& spec, const std::string& metric, StudyJobs::Job& j) {
  std::string err;
  const study::SweepResult r = study::run_sweep(
      spec, err, [&j](std::uint64_t done, std::uint64_t total) { j.progress(done, total); }, &j.cancel);
  if (!err.empty()) {
    j.status = "failed";
    j.error = err;
    return;
  }
  j.progress(r.rows.size(), std::max<std::uint64_t>(j.total.load(), r.rows.size()));
  j.status = r.cancelled ? "cancelled" : "done";
  j.result = study::sweep_to_json(spec, r);
  j.result["status"] = j.status;  // a cancelled sweep's rows are the runs done before it stopped
  std::vector<std::string> paths;
  std::vector<std::vector<double>> axes;
  for (const auto& v : spec.vary) {
    paths.push_back(v.path);
    axes.push_back(v.values);
  }
  j.artefacts["csv"] = study::sweep_to_csv(paths, r.rows);
  j.artefacts["svg"] =
      study::sweep_svg(paths, axes, r.rows, metric, spec.scenario.value("name", std::string("sweep")) + ": " + metric);
  j.wall_s = r.wall_s;
}

// {"scenario": {...} (default: the loaded one), "vary": ["PATH=VALUES", ...], "sample": N,
//  "seed": S, "metric": "nadir_hz"}: a job; answers 202 with its id.
void post_sweep(Services& s, Call& c) {
  std::string bad;
  const auto body_json = parse_untrusted_json(c.request.body, bad);
  if (!body_json) return c.error(400, bad);
  const json& j = *body_json;
  if (!j.is_object()) return c.error(400, "body must be a JSON object with \"vary\": [\"PATH=VALUES\", ...]");
  study::SweepSpec spec;
  std::string metric = "nadir_hz";
  const std::vector<std::string> problems = read_sweep(j, spec, metric);
  if (!problems.empty()) return c.error(400, "sweep refused", problems);
  spec.threads = StudyJobs::threads();  // one core left to the loop
  auto start = [&s, spec = std::move(spec), metric, respond = c.respond](std::string scenario_text) mutable {
    LoadResult r = parse_scenario(scenario_text);
    if (!r.system) return answer(respond, 400, error_json("invalid scenario", issue_texts(r.issues)));
    spec.scenario = scenario_to_json(r.system->def());
    if (std::string paths = study::check_vary_paths(spec.scenario, spec.vary); !paths.empty()) {
      for (std::size_t at; (at = paths.find("--vary ")) != std::string::npos;) paths.erase(at, 2);  // "vary ..."
      return answer(respond, 400, error_json(paths));
    }
    // Each axis at its smallest and largest value must give a valid scenario: an absurd value is
    // refused now, not found in every row later.
    for (const auto& v : spec.vary)
      for (double x :
           {*std::min_element(v.values.begin(), v.values.end()), *std::max_element(v.values.begin(), v.values.end())}) {
        json probe = spec.scenario;
        std::string err;
        if (!study::set_path(probe, v.path, x, err)) return answer(respond, 400, error_json("vary " + err));
        LoadResult pr = parse_scenario(probe.dump());
        if (!pr.system)
          return answer(
              respond, 400,
              error_json("vary " + v.path + "=" + fmt_num(x) + " gives an invalid scenario", issue_texts(pr.issues)));
      }
    std::string err;
    json info{{"metric", metric}};
    auto job = s.jobs.submit(
        "sweep", std::move(info),
        [spec = std::move(spec), metric](StudyJobs::Job& running) { run_sweep_job(spec, metric, running); }, err);
    answer_submitted(respond, job, err);
  };
  if (j.contains("scenario")) return start(j["scenario"].dump());
  s.live->scenario(std::move(start));
}

}  // namespace

std::shared_ptr<StudyJobs::Job> find_job(Services& s, const Call& c, const std::string& kind) {
  auto job = s.jobs.find(kind, c.params.at(0));
  if (!job)
    c.error(404, "no " + kind + " job " + quote_cut(c.params.at(0)) + " (finished jobs are kept until 16 newer ones)");
  return job;
}

std::shared_ptr<StudyJobs::Job> finished_job(Services& s, const Call& c, const std::string& kind) {
  auto job = find_job(s, c, kind);
  if (!job) return nullptr;
  const std::string& id = c.params.at(0);
  if (!job->finished.load(std::memory_order_acquire))
    return c.error(409, kind + " " + id + " is still running"), nullptr;
  if (job->status == "failed") return c.error(409, kind + " " + id + " failed: " + job->error), nullptr;
  if (job->result.is_null())
    return c.error(409, kind + " " + id + " was " + job->status + ": it has no result"), nullptr;
  return job;
}

bool take_run_slot(Services& s, const Call& c, const std::string& busy) {
  if (s.counters.replays_active.fetch_add(1) < s.options.max_replays) return true;
  s.counters.replays_active.fetch_sub(1);
  c.respond(Reply{429, "application/json", error_json(busy), {{"Retry-After", "2"}}, {}});
  return false;
}

void answer_submitted(const Respond& respond, const std::shared_ptr<StudyJobs::Job>& job, const std::string& error) {
  if (!job) return respond(Reply{429, "application/json", error_json(error), {{"Retry-After", "10"}}, {}});
  respond(Reply{202,
                "application/json",
                StudyJobs::status_json(*job).dump(),
                {{"Location", "/api/v1/" + job->kind + "s/" + job->id}},
                {}});
}

void cancel_job(Services& s, const Call& c, const std::string& kind) {
  auto job = find_job(s, c, kind);
  if (!job) return;
  if (job->finished.load(std::memory_order_acquire))
    return c.error(409, kind + " " + job->id + " has already ended (" + job->status + "): nothing to cancel");
  job->cancel = true;
  c.reply(200, StudyJobs::status_json(*job).dump());
}

void list_jobs(Services& s, const Call& c, const std::string& kind) {
  nlohmann::ordered_json jobs = nlohmann::ordered_json::array();
  for (const auto& job : s.jobs.list(kind)) jobs.push_back(StudyJobs::status_json(*job));
  c.reply(200, nlohmann::ordered_json{{"jobs", std::move(jobs)}}.dump());
}

namespace {

void list_sweeps(Services& s, Call& c) { list_jobs(s, c, "sweep"); }

void get_sweep(Services& s, Call& c) {
  if (auto job = find_job(s, c, "sweep")) c.reply(200, StudyJobs::status_json(*job).dump());
}

void delete_sweep(Services& s, Call& c) { cancel_job(s, c, "sweep"); }

void sweep_result(Services& s, Call& c) {
  auto job = finished_job(s, c, "sweep");
  if (!job) return;
  const std::string format = c.target.get("format", "json");
  if (format != "json" && format != "csv" && format != "svg")
    return c.error(400, "query parameter format: must be json, csv or svg, got \"" + format + "\"");
  if (format == "svg" && job->artefact("svg").empty())
    return c.error(404, "no plot: it needs one or two varied fields");
  Reply r;
  r.type = format == "json" ? "application/json" : format == "csv" ? "text/csv; charset=utf-8" : "image/svg+xml";
  r.body = format == "json" ? job->result.dump() : job->artefact(format);
  r.headers.emplace_back("Droopline-Job-Status", job->status);
  c.respond(std::move(r));
}

// A requirements file (the body) checked against a run of the loaded scenario, on the workers.
void assess(Services& s, Call& c) {
  std::vector<Issue> issues;
  auto req_def = study::parse_requirements(c.request.body, issues);
  if (!req_def) return c.error(400, "invalid requirements", issue_texts(issues));
  if (!take_run_slot(s, c, "too many runs at once; retry later")) return;
  s.live->scenario([&s, respond = c.respond, requirements = std::move(*req_def)](std::string text) {
    s.run_on_workers([&s, respond, requirements, text = std::move(text)] {
      LoadResult r = parse_scenario(text);
      std::string body;
      std::vector<Issue> bad;
      if (r.system) bad = study::requirement_issues(r.system->def(), requirements);
      if (r.system && bad.empty())
        body = study::assessment_to_json(study::assess(r.system->def(), requirements), requirements).dump();
      s.counters.replays_active.fetch_sub(1);
      if (!r.system) return answer(respond, 400, error_json("invalid scenario", issue_texts(r.issues)));
      if (!bad.empty()) return answer(respond, 400, error_json("invalid requirements", issue_texts(bad)));
      answer(respond, 200, std::move(body));
    });
  });
}

// The small-signal modes of the live scenario (GET) or of a posted one (POST), computed on the
// workers so neither the loop nor the network thread waits for the solver.
void modes(Services& s, Call& c) {
  double threshold = 0.05;
  const std::string given = c.target.get("damping_threshold", "0.05");
  char* end = nullptr;
  const bool decimal = !given.empty() && given.find_first_not_of("0123456789+-.eE") == std::string::npos;
  threshold = decimal ? std::strtod(given.c_str(), &end) : 0.0;
  if (!decimal || end != given.c_str() + given.size() || !std::isfinite(threshold))
    return c.error(400, "query parameter damping_threshold: must be a decimal number, got " + quote_cut(given));
  if (!(threshold >= 0.0 && threshold <= 1.0))
    return c.error(400, "query parameter damping_threshold: must lie within [0, 1], got " + fmt_num(threshold));
  auto analyse = [&s, threshold, respond = c.respond](std::string scenario_text) {
    s.run_on_workers([threshold, respond, text = std::move(scenario_text)] {
      LoadResult r = parse_scenario(text);
      if (!r.system) return answer(respond, 400, error_json("invalid scenario", issue_texts(r.issues)));
      study::ModesOptions opt;
      opt.damping_threshold = threshold;
      const study::ModesResult m = study::small_signal(r.system->def(), opt);
      if (!m.error.empty()) return answer(respond, 422, error_json(m.error));
      answer(respond, 200, study::modes_to_json(m, opt).dump());
    });
  };
  if (c.request.verb == Verb::post) return analyse(c.request.body);
  s.live->scenario(analyse);
}

}  // namespace

void add_study_routes(std::vector<Route>& routes) {
  const Role instructor = Role::instructor;
  routes.insert(routes.end(), {
                                  {Verb::post, "/api/v1/replays", instructor, kWorkers, replays},
                                  {Verb::post, "/api/v1/sweeps", instructor, kSweeps, post_sweep},
                                  {Verb::get, "/api/v1/sweeps", Role::viewer, "", list_sweeps},
                                  {Verb::get, "/api/v1/sweeps/{id}", Role::viewer, "", get_sweep},
                                  {Verb::delete_, "/api/v1/sweeps/{id}", instructor, kSweeps, delete_sweep},
                                  {Verb::get, "/api/v1/sweeps/{id}/result", Role::viewer, "", sweep_result, {"format"}},
                                  {Verb::get, "/api/v1/modes", instructor, kWorkers, modes, {"damping_threshold"}},
                                  {Verb::post, "/api/v1/modes", instructor, kWorkers, modes, {"damping_threshold"}},
                                  {Verb::post, "/api/v1/assess", instructor, kWorkers, assess},
                              });
}

}  // namespace droopline::server
