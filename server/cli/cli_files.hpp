#pragma once
// Output files and progress for the command-line jobs.
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

namespace droopline::cli {

namespace fs = std::filesystem;

// A file that appears under its final name only when complete: written to a hidden temporary
// name beside it and renamed (atomic on one filesystem); removed if never committed.
class AtomicFile {
 public:
  explicit AtomicFile(fs::path final_path) : final_(std::move(final_path)) {
    std::string name(1, '.');
    name += final_.filename().string();
    name += ".partial-";
    name += std::to_string(::getpid());
    temp_ = final_.parent_path() / name;
    out_.open(temp_, std::ios::binary | std::ios::trunc);
  }
  ~AtomicFile() {
    if (!committed_) {
      out_.close();
      std::error_code ec;
      fs::remove(temp_, ec);
    }
  }
  bool ok() const { return static_cast<bool>(out_); }
  std::ofstream& stream() { return out_; }
  bool commit() {
    out_.flush();
    out_.close();
    if (!out_) return false;
    std::error_code ec;
    fs::rename(temp_, final_, ec);
    committed_ = !ec;
    return committed_;
  }
  const fs::path& temp() const { return temp_; }

 private:
  fs::path final_, temp_;
  std::ofstream out_;
  bool committed_ = false;
};

class Progress {
 public:
  /// Shows `[####   ]  42.0 %  t = 4.2 / 10.0 s` on stderr when enabled (a terminal).
  explicit Progress(bool enabled, const char* label = "t =", const char* unit = " s")
      : enabled_(enabled), label_(label), unit_(unit), last_(std::chrono::steady_clock::now()) {}
  void update(double done, double total) {
    if (!enabled_) return;
    const auto now = std::chrono::steady_clock::now();
    if (now - last_ < std::chrono::milliseconds(200)) return;
    last_ = now;
    shown_ = true;
    const int width = 40;
    const double frac = total > 0 ? std::min(1.0, done / total) : 1.0;
    const int fill = static_cast<int>(frac * width);
    std::fprintf(stderr, "\r[%s%s] %5.1f %%  %s %.1f / %.1f%s", std::string(fill, '#').c_str(),
                 std::string(width - fill, ' ').c_str(), frac * 100.0, label_, done, total, unit_);
    std::fflush(stderr);
  }
  ~Progress() {
    if (shown_) std::fprintf(stderr, "\r%80s\r", "");
  }

 private:
  bool enabled_;
  const char* label_;
  const char* unit_;
  bool shown_ = false;
  std::chrono::steady_clock::time_point last_;
};

}  // namespace droopline::cli
