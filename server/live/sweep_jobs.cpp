#include "sweep_jobs.hpp"

#include <algorithm>

namespace droopline::server {

SweepJobs::~SweepJobs() {
  std::deque<std::shared_ptr<Job>> jobs;
  {
    std::lock_guard lock(mutex_);
    jobs.swap(jobs_);
  }
  for (auto& j : jobs) j->cancel = true;
  for (auto& j : jobs)
    if (j->thread.joinable()) j->thread.join();
}

std::shared_ptr<SweepJobs::Job> SweepJobs::submit(study::SweepSpec spec, std::string metric, std::string& error) {
  std::lock_guard lock(mutex_);
  const auto running = std::count_if(jobs_.begin(), jobs_.end(), [](const auto& j) { return !j->finished.load(); });
  if (static_cast<std::size_t>(running) >= max_running_) {
    error = "a sweep is already running (at most " + std::to_string(max_running_) + " at once); wait for it or cancel it";
    return nullptr;
  }
  // Forget the oldest finished jobs beyond the ones kept.
  while (jobs_.size() >= keep_) {
    auto it = std::find_if(jobs_.begin(), jobs_.end(), [](const auto& j) { return j->finished.load(); });
    if (it == jobs_.end()) break;
    if ((*it)->thread.joinable()) (*it)->thread.join();
    jobs_.erase(it);
  }
  auto job = std::make_shared<Job>();
  job->id = std::to_string(next_id_++);
  job->spec = std::move(spec);
  job->metric = std::move(metric);
  job->thread = std::jthread([j = job.get()] {
    std::string err;
    study::SweepResult r;
    try {
      r = study::run_sweep(
          j->spec, err,
          [j](std::uint64_t done, std::uint64_t total) {
            j->done = done;
            j->total = total;
          },
          &j->cancel);
    } catch (const std::exception& e) {  // out of memory, say: the job fails, the server goes on
      err = std::string("the sweep could not be run: ") + e.what();
    }
    if (!err.empty()) {
      j->status = "failed";
      j->error = err;
    } else {
      j->done = r.rows.size();
      j->total = std::max<std::uint64_t>(j->total.load(), r.rows.size());
      j->status = r.cancelled ? "cancelled" : "done";
      j->result = study::sweep_to_json(j->spec, r);
      std::vector<std::string> paths;
      std::vector<std::vector<double>> axes;
      for (const auto& v : j->spec.vary) {
        paths.push_back(v.path);
        axes.push_back(v.values);
      }
      j->csv = study::sweep_to_csv(paths, r.rows);
      j->svg = study::sweep_svg(paths, axes, r.rows, j->metric, j->spec.scenario.value("name", std::string("sweep")) + ": " + j->metric);
      j->wall_s = r.wall_s;
    }
    j->finished.store(true, std::memory_order_release);
  });
  jobs_.push_back(job);
  return job;
}

std::shared_ptr<SweepJobs::Job> SweepJobs::find(const std::string& id) const {
  std::lock_guard lock(mutex_);
  for (const auto& j : jobs_)
    if (j->id == id) return j;
  return nullptr;
}

nlohmann::ordered_json SweepJobs::status_json(const Job& j) {
  const bool finished = j.finished.load(std::memory_order_acquire);
  nlohmann::ordered_json out{{"id", j.id}, {"status", finished ? j.status : std::string("running")},
                             {"done", j.done.load()}, {"total", j.total.load()}, {"metric", j.metric}};
  if (finished && !j.error.empty()) out["error"] = j.error;
  if (finished && j.status != "failed") {
    out["wall_s"] = j.wall_s;
    out["result"] = "/api/v1/sweeps/" + j.id + "/result";
  }
  return out;
}

}  // namespace droopline::server
