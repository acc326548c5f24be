#include "study_jobs.hpp"

#include <algorithm>
#include <chrono>

namespace droopline::server {

void StudyJobs::Job::progress(std::uint64_t n, std::uint64_t of) {
  total.store(of, std::memory_order_relaxed);
  std::uint64_t seen = done.load(std::memory_order_relaxed);
  while (n > seen && !done.compare_exchange_weak(seen, n, std::memory_order_relaxed)) {
  }
}

const std::string& StudyJobs::Job::artefact(const std::string& name) const {
  static const std::string none;
  const auto it = artefacts.find(name);
  return it == artefacts.end() ? none : it->second;
}

StudyJobs::~StudyJobs() {
  std::deque<std::shared_ptr<Job>> jobs;
  {
    std::lock_guard lock(mutex_);
    jobs.swap(jobs_);
  }
  for (auto& j : jobs) j->cancel = true;
  for (auto& j : jobs)
    if (j->thread.joinable()) j->thread.join();
}

unsigned StudyJobs::threads() { return std::max(1u, std::thread::hardware_concurrency() - 1); }

std::shared_ptr<StudyJobs::Job> StudyJobs::submit(const std::string& kind, nlohmann::ordered_json info, Work work,
                                                  std::string& error) {
  std::lock_guard lock(mutex_);
  auto of_kind = [&kind](const auto& j) { return j->kind == kind; };
  const auto running = std::count_if(jobs_.begin(), jobs_.end(),
                                     [&of_kind](const auto& j) { return of_kind(j) && !j->finished.load(); });
  if (static_cast<std::size_t>(running) >= max_running_) {
    error = "a " + kind + " is already running (at most " + std::to_string(max_running_) +
            " at once); wait for it or cancel it";
    return nullptr;
  }
  // Forget the oldest finished jobs of this kind beyond the ones kept: cancelled and failed ones
  // first (they have nothing to fetch), so a run of cancelled submissions cannot push out results.
  while (static_cast<std::size_t>(std::count_if(jobs_.begin(), jobs_.end(), of_kind)) >= keep_) {
    auto it = std::find_if(jobs_.begin(), jobs_.end(), [&of_kind](const auto& j) {
      return of_kind(j) && j->finished.load(std::memory_order_acquire) && j->status != "done";
    });
    if (it == jobs_.end())
      it = std::find_if(jobs_.begin(), jobs_.end(),
                        [&of_kind](const auto& j) { return of_kind(j) && j->finished.load(); });
    if (it == jobs_.end()) break;
    if ((*it)->thread.joinable()) (*it)->thread.join();
    jobs_.erase(it);
  }
  auto job = std::make_shared<Job>();
  job->id = std::to_string(++next_id_[kind]);
  job->kind = kind;
  job->info = std::move(info);
  job->thread = std::jthread([j = job.get(), work = std::move(work)] {
    const auto t0 = std::chrono::steady_clock::now();
    try {
      work(*j);
    } catch (const std::exception& e) {  // out of memory, say: the job fails, the server goes on
      j->status = "failed";
      j->error = "the " + j->kind + " could not be run: " + e.what();
    }
    if (j->wall_s == 0.0) j->wall_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    j->finished.store(true, std::memory_order_release);
  });
  jobs_.push_back(job);
  return job;
}

std::shared_ptr<StudyJobs::Job> StudyJobs::find(const std::string& kind, const std::string& id) const {
  std::lock_guard lock(mutex_);
  for (const auto& j : jobs_)
    if (j->kind == kind && j->id == id) return j;
  return nullptr;
}

std::vector<std::shared_ptr<StudyJobs::Job>> StudyJobs::list(const std::string& kind) const {
  std::lock_guard lock(mutex_);
  std::vector<std::shared_ptr<Job>> out;
  for (auto it = jobs_.rbegin(); it != jobs_.rend(); ++it)
    if ((*it)->kind == kind) out.push_back(*it);
  return out;
}

nlohmann::ordered_json StudyJobs::status_json(const Job& j) {
  const bool finished = j.finished.load(std::memory_order_acquire);
  nlohmann::ordered_json out{{"id", j.id},
                             {"kind", j.kind},
                             {"status", finished ? j.status : std::string("running")},
                             {"done", j.done.load()},
                             {"total", j.total.load()}};
  for (auto it = j.info.begin(); it != j.info.end(); ++it) out[it.key()] = it.value();
  if (finished && !j.error.empty()) out["error"] = j.error;
  if (finished && j.status != "failed") out["wall_s"] = j.wall_s;
  // A cancelled sweep keeps the rows it ran; a cancelled fit has none.
  if (finished && j.status != "failed" && !j.result.is_null())
    out["result"] = "/api/v1/" + j.kind + "s/" + j.id + "/result";
  return out;
}

}  // namespace droopline::server
