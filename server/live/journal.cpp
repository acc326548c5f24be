#include "journal.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

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
  cut_torn_tail();
  check_last_line();
}

void Journal::check_last_line() {
  // A whole last line that is no journal record (edited by hand, another file given) would make
  // every record after it unreadable to replay: refused before anything is appended.
  const int fd = ::open(path_.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return;
  struct stat st {};
  if (::fstat(fd, &st) != 0 || !S_ISREG(st.st_mode) || st.st_size < 2) {
    ::close(fd);
    return;
  }
  constexpr off_t kMost = 1 << 20;  // a longer last line (a huge scenario) is not looked at
  const off_t from = st.st_size > kMost ? st.st_size - kMost : 0;
  std::string tail(static_cast<std::size_t>(st.st_size - from), '\0');
  const ssize_t n = ::pread(fd, tail.data(), tail.size(), from);
  ::close(fd);
  if (n != static_cast<ssize_t>(tail.size()) || tail.back() != '\n') return;
  tail.pop_back();
  const std::size_t nl = tail.rfind('\n');
  if (nl == std::string::npos && from > 0) return;
  const std::string_view last = nl == std::string::npos ? std::string_view(tail) : std::string_view(tail).substr(nl + 1);
  std::string why;
  const auto j = parse_untrusted_json(last, why);
  if (j && j->is_object() && j->contains("type")) return;
  ok_ = false;
  error_ = "journal \"" + path_ + "\": its last line is not a journal record (" +
           (j ? std::string("a JSON value without \"type\"") : why) +
           "): records appended after it could not be replayed; move the file aside, or remove that line";
}

void Journal::cut_torn_tail() {
  // A crash in the middle of a record (a kill, a power cut) leaves part of a line at the end. The
  // reader skips a torn last line, but not one with the next record glued onto it: cut it off so
  // the next record starts a line of its own.
  const int fd = ::open(path_.c_str(), O_RDWR | O_CLOEXEC);
  if (fd < 0) return;  // not readable: appending still works, and replay will say what it finds
  struct stat st {};
  if (::fstat(fd, &st) != 0 || !S_ISREG(st.st_mode) || st.st_size == 0) {
    ::close(fd);
    return;
  }
  char buf[4096];
  off_t end = st.st_size, keep = 0;
  bool found = false;
  while (end > 0 && !found) {
    const off_t from = end > static_cast<off_t>(sizeof buf) ? end - static_cast<off_t>(sizeof buf) : 0;
    const ssize_t n = ::pread(fd, buf, static_cast<std::size_t>(end - from), from);
    if (n != end - from) break;  // unreadable: leave it as it is
    for (ssize_t i = n - 1; i >= 0; --i)
      if (buf[i] == '\n') {
        keep = from + i + 1;
        found = true;
        break;
      }
    end = from;
  }
  if ((found || end == 0) && keep < st.st_size && ::ftruncate(fd, keep) == 0 && ::fdatasync(fd) == 0)
    repaired_ = "journal \"" + path_ + "\": its last record was cut short (" + std::to_string(st.st_size - keep) +
                " bytes, a crash while it was written): cut off, the new records start on a line of their own";
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

}  // namespace droopline
