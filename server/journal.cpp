#include "journal.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>

#include <nlohmann/json.hpp>

#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {

Journal::Journal(std::string path) : path_(std::move(path)) {
  if (path_.empty()) return;
  const int fd = ::open(path_.c_str(), O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) {
    ok_ = false;
    error_ = "cannot open journal \"" + path_ + "\" for appending: " + std::strerror(errno);
    return;
  }
  ::close(fd);
}

bool Journal::append(const std::string& json_line) {
  if (path_.empty()) return true;
  auto fail = [this](const char* what, int err) {
    error_ = "writing the journal \"" + path_ + "\" failed (" + what + "): " + std::strerror(err);
    status_ = (err == ENOSPC || err == EDQUOT) ? 507 : 500;
    return false;
  };
  const int fd = ::open(path_.c_str(), O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) return fail("open", errno);
  struct stat st {};
  const bool regular = ::fstat(fd, &st) == 0 && S_ISREG(st.st_mode);
  std::string line = json_line + '\n';
  const char* p = line.data();
  std::size_t left = line.size();
  int err = 0;
  const char* what = "write";
  while (left > 0) {
    const ssize_t n = ::write(fd, p, left);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      err = n < 0 ? errno : ENOSPC;
      break;
    }
    p += n;
    left -= static_cast<std::size_t>(n);
  }
  if (err == 0 && ::fdatasync(fd) != 0 && errno != EINVAL) {  // EINVAL: a device without sync
    err = errno;
    what = "fdatasync";
  }
  if (err != 0) {
    // Never leave part of a record in front of the next one.
    if (regular && left < line.size()) (void)!::ftruncate(fd, st.st_size);
    ::close(fd);
    return fail(what, err);
  }
  if (::close(fd) != 0) return fail("close", errno);
  return true;
}

JournalWriter::JournalWriter(std::string path, std::function<void()> wake)
    : journal_(std::move(path)), wake_(std::move(wake)), thread_([this] { run(); }) {}

JournalWriter::~JournalWriter() {
  {
    std::lock_guard lock(mutex_);
    stop_ = true;
  }
  cv_.notify_all();
  thread_.join();
}

std::shared_ptr<const JournalWriter::Outcome> JournalWriter::submit(std::string json_line) {
  auto outcome = std::make_shared<Outcome>();
  {
    std::lock_guard lock(mutex_);
    queue_.emplace_back(std::move(json_line), outcome);
  }
  cv_.notify_all();
  return outcome;
}

void JournalWriter::wait_idle() {
  std::unique_lock lock(mutex_);
  cv_.wait(lock, [this] { return queue_.empty() && !busy_; });
}

bool JournalWriter::append_now(const std::string& json_line) {
  wait_idle();
  return journal_.append(json_line);
}

void JournalWriter::run() {
  std::unique_lock lock(mutex_);
  for (;;) {
    cv_.wait(lock, [this] { return stop_ || !queue_.empty(); });
    if (queue_.empty()) return;  // stopping, and everything submitted is written
    auto [line, outcome] = std::move(queue_.front());
    queue_.pop_front();
    busy_ = true;
    lock.unlock();
    if (journal_.append(line)) {
      outcome->state.store(durable, std::memory_order_release);
    } else {
      outcome->error = journal_.error();
      outcome->status = journal_.http_status();
      outcome->state.store(failed, std::memory_order_release);
    }
    if (wake_) wake_();
    lock.lock();
    busy_ = false;
    cv_.notify_all();
  }
}

JournalRead read_journal(const std::string& path) {
  JournalRead out;
  std::ifstream in(path);
  if (!in) {
    out.issues.push_back({"journal", "cannot read \"" + path + "\"", false});
    return out;
  }
  std::string line;
  for (int n = 1; std::getline(in, line); ++n) {
    if (line.empty()) continue;
    const std::string where = "journal line " + std::to_string(n);
    std::string bad;
    auto parsed = parse_untrusted_json(line, bad);
    if (!parsed || !parsed->is_object() || !parsed->contains("type") || !(*parsed)["type"].is_string() ||
        !parsed->contains("step") || !(*parsed)["step"].is_number_integer()) {
      // A torn last line (a crash mid-write) was never acknowledged: stop there.
      if (in.peek() == EOF) break;
      out.issues.push_back({where, "not a journal record" + (bad.empty() ? std::string() : " (" + bad + ")"), false});
      return out;
    }
    nlohmann::ordered_json& j = *parsed;
    const std::string type = j["type"].get<std::string>();
    const std::int64_t step = j["step"].get<std::int64_t>();
    if (type == "scenario") {
      LoadResult r = parse_scenario(j["scenario"].dump());
      if (!r.system) {
        for (auto& i : r.issues)
          if (!i.warning) out.issues.push_back({where, i.text(), false});
        return out;
      }
      out.runs.push_back({std::move(*r.system), {}, 0});
    } else if (type == "commands" || type == "stop") {
      if (out.runs.empty()) {
        out.issues.push_back({where, "a record before any scenario", false});
        return out;
      }
      JournalRun& run = out.runs.back();
      if (type == "commands") {
        CommandParse cp = parse_commands(j["commands"].dump());
        if (!cp.issues.empty()) {
          out.issues.push_back({where, cp.issues.front().text(), false});
          return out;
        }
        run.commands.emplace_back(step, cp.commands);
      }
      run.last_step = std::max(run.last_step, step);
    } else {
      out.issues.push_back({where, "unknown record type \"" + type + "\"", false});
      return out;
    }
  }
  return out;
}

}  // namespace droopline
