// Model validation over HTTP: fitting a unit's parameters to a posted recording as a study job, and
// injection tests on the worker pool. Both are the instructor's (they take the server's spare cores).
// Every problem with a request is answered 400 naming its field before anything runs; the
// recording is read with the same readers as `droopline fit`, from memory instead of a file.
#include <algorithm>
#include <atomic>
#include <cmath>
#include <memory>
#include <nlohmann/json.hpp>

#include "api.hpp"
#include "droopline/fit.hpp"
#include "droopline/format.hpp"
#include "droopline/inject.hpp"
#include "droopline/json_input.hpp"
#include "droopline/playback.hpp"
#include "droopline/recording.hpp"
#include "droopline/scenario_io.hpp"
#include "fit_request.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

constexpr const char* kFits = "fits are for the instructor (a fit job runs on the server's spare cores)";
constexpr const char* kFitResult =
    "a fit's result is the instructor's (it carries the measured output of the plant's recording)";
constexpr const char* kInjections = "injection tests are for the instructor (they run on the server's worker pool)";
constexpr std::size_t kMaxSeriesPoints = 2000;  // the page plots at most this many points per series

void answer(const Respond& respond, int status, std::string body) {
  respond(Reply{status, "application/json", std::move(body), {}, {}});
}

// One of the worker pool's run slots, or a 429 answered.
bool take_slot(Services& s, const Call& c) {
  return take_run_slot(s, c,
                       "too many runs at once (at most " + std::to_string(s.options.max_replays) +
                           " replays, assessments, fit checks and injection tests); retry later");
}

// A slot taken by take_slot, given back once: by give_back before an answer (so the client's next
// request finds it free: the work's copies of the handle may outlive the answer a little), or
// when the last copy of the handle goes (whichever path the work takes, exceptions included).
using Slot = std::shared_ptr<std::atomic<bool>>;
Slot held_slot(Services& s) {
  return Slot(new std::atomic<bool>(true), [&s](std::atomic<bool>* held) {
    if (held->exchange(false)) s.counters.replays_active.fetch_sub(1);
    delete held;
  });
}
void give_back(Services& s, const Slot& slot) {
  if (slot && slot->exchange(false)) s.counters.replays_active.fetch_sub(1);
}

// Runs `then(scenario_text)` on the workers with the posted scenario, or the loaded one.
void with_scenario(Services& s, std::optional<std::string> posted, std::function<void(std::string)> then) {
  if (posted) return s.run_on_workers([then = std::move(then), text = std::move(*posted)] { then(text); });
  s.live->scenario([&s, then = std::move(then)](std::string text) {
    s.run_on_workers([then, text = std::move(text)] { then(text); });
  });
}

// Every `step`-th index of `n` and the last, so a plot keeps its ends.
std::vector<std::size_t> decimated(std::size_t n, std::size_t at_most) {
  std::vector<std::size_t> idx;
  const std::size_t step = std::max<std::size_t>(1, (n + at_most - 2) / std::max<std::size_t>(1, at_most - 1));
  for (std::size_t i = 0; i < n; i += step) idx.push_back(i);
  if (n > 0 && idx.back() != n - 1) idx.push_back(n - 1);
  return idx;
}

// A fit job's work: the fit, its JSON with the series for the page, the plot and the fragment.
void run_fit_job(const study::FitSpec& spec, StudyJobs::Job& j) {
  study::FitControl control;
  control.progress = [&j](std::uint64_t done, std::uint64_t total) { j.progress(done, total); };
  control.cancel = &j.cancel;
  std::vector<std::string> errors;
  const auto results = study::run_fits({spec}, StudyJobs::threads(), errors, control);
  if (j.cancel.load()) {
    j.status = "cancelled";
    return;
  }
  if (!results[0]) {
    j.status = "failed";
    j.error = errors[0];
    return;
  }
  const study::FitResult& r = *results[0];
  json doc = study::fit_to_json(r);
  json series{{"t_s", json::array()},
              {"measured_mw", json::array()},
              {"initial_mw", json::array()},
              {"fitted_mw", json::array()}};
  for (std::size_t i : decimated(r.t_s.size(), kMaxSeriesPoints)) {
    series["t_s"].push_back(r.t_s[i]);
    series["measured_mw"].push_back(r.measured_mw[i]);
    series["initial_mw"].push_back(i < r.initial_mw.size() ? json(r.initial_mw[i]) : json(nullptr));
    series["fitted_mw"].push_back(i < r.fitted_mw.size() ? json(r.fitted_mw[i]) : json(nullptr));
  }
  doc["series"] = std::move(series);
  j.result = std::move(doc);
  j.artefacts["svg"] = study::fit_svg(r);
  j.artefacts["fragment"] = r.fragment.dump(2);
  j.progress(j.total.load(), j.total.load());
  j.status = "done";
}

// The spec of a checked request against the scenario `text`; 400 answered otherwise.
std::optional<study::FitSpec> fit_spec(const FitRequest& req, const std::string& text, std::string& refusal) {
  LoadResult loaded = parse_scenario(text);
  if (!loaded.system) return refusal = error_json("invalid scenario", issue_texts(loaded.issues)), std::nullopt;
  std::vector<std::string> problems;
  auto spec = build_fit_spec(req, loaded.system->def(), problems);
  if (!spec) return refusal = error_json("fit refused", problems), std::nullopt;
  return spec;
}

// Runs `fn`; an exception (out of memory, say) answers 500 rather than leaving the call unanswered.
template <class F>
void guarded(const Respond& respond, F&& fn) {
  try {
    fn();
  } catch (const std::exception& e) {
    answer(respond, 500, error_json(std::string("the request could not be handled: ") + e.what()));
  }
}

// The body as described in the README ("Studies over HTTP and on the page"): checked on the
// workers, then a job; answers 202 with the job's status. The worker slot is held until the job is
// submitted or refused.
void post_fit(Services& s, Call& c) {
  if (!take_slot(s, c)) return;
  auto slot = held_slot(s);
  s.run_on_workers([&s, slot, body = c.request.body, respond = c.respond]() mutable {
    guarded(respond, [&] {
      std::vector<std::string> problems;
      auto req = read_fit_request(body, problems);
      if (!req) {
        give_back(s, slot);
        return answer(respond, 400, error_json("fit refused", problems));
      }
      auto posted = req->scenario ? std::optional<std::string>(req->scenario->dump()) : std::nullopt;
      // Shared, not copied: the recording in it may be megabytes, and the callback is copied on its way.
      auto checked = std::make_shared<const FitRequest>(std::move(*req));
      with_scenario(s, std::move(posted), [&s, slot, checked, respond](std::string text) mutable {
        guarded(respond, [&] {
          std::string refusal;
          auto spec = fit_spec(*checked, text, refusal);
          give_back(s, slot);
          if (!spec) return answer(respond, 400, std::move(refusal));
          std::string err;
          const std::uint64_t budget = study::fit_budget(*spec);
          auto job = s.jobs.submit(
              "fit", json{{"unit", checked->unit}}, [spec = std::move(*spec)](StudyJobs::Job& j) { run_fit_job(spec, j); },
              err);
          if (job) job->progress(0, budget);  // the budget shows from the first poll on
          answer_submitted(respond, job, err);
        });
      });
    });
  });
}

void list_fits(Services& s, Call& c) { list_jobs(s, c, "fit"); }

void get_fit(Services& s, Call& c) {
  if (auto job = find_job(s, c, "fit")) c.reply(200, StudyJobs::status_json(*job).dump());
}

void delete_fit(Services& s, Call& c) { cancel_job(s, c, "fit"); }

void fit_result(Services& s, Call& c) {
  auto job = finished_job(s, c, "fit");
  if (!job) return;
  const std::string format = c.target.get("format", "json");
  Reply r;
  if (format == "json") {
    r.body = job->result.dump(-1, ' ', false, json::error_handler_t::replace);
  } else if (format == "svg") {
    r.type = "image/svg+xml";
    r.body = job->artefact("svg");
  } else if (format == "fragment") {
    r.body = job->artefact("fragment");
  } else {
    return c.error(400, "query parameter format: must be json, svg or fragment, got " + quote_cut(format));
  }
  c.respond(std::move(r));
}

// {"scenario"?: {...}, "unit": "ID", "profile": {...}}: every test of the profile on the unit, with
// a plot per test, on the workers.
void post_injection(Services& s, Call& c) {
  std::vector<std::string> problems;
  auto req = read_injection_request(c.request.body, problems);
  if (!req) return c.error(400, "injection test refused", problems);
  if (!take_slot(s, c)) return;
  auto slot = held_slot(s);
  auto posted = req->scenario ? std::optional<std::string>(req->scenario->dump()) : std::nullopt;
  with_scenario(s, std::move(posted), [&s, slot, req = std::move(*req), respond = c.respond](std::string text) mutable {
    guarded(respond, [&] {
      int status = 200;
      const json out = run_injection_request(req, text, status);
      give_back(s, slot);
      answer(respond, status, out.dump(-1, ' ', false, json::error_handler_t::replace));
    });
  });
}

}  // namespace

void add_fit_routes(std::vector<Route>& routes) {
  const Role instructor = Role::instructor;
  routes.insert(routes.end(), {
                                  {Verb::post, "/api/v1/fits", instructor, kFits, post_fit},
                                  {Verb::get, "/api/v1/fits", Role::viewer, "", list_fits},
                                  {Verb::get, "/api/v1/fits/{id}", Role::viewer, "", get_fit},
                                  {Verb::delete_, "/api/v1/fits/{id}", instructor, kFits, delete_fit},
                                  {Verb::get, "/api/v1/fits/{id}/result", instructor, kFitResult, fit_result, {"format"}},
                                  {Verb::post, "/api/v1/injections", instructor, kInjections, post_injection},
                              });
}

}  // namespace droopline::server
