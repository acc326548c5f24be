#include "seats.hpp"

#include <algorithm>
#include <cctype>
#include <random>

namespace droopline::server {

std::string SeatRoster::draw_code() {
  static std::mutex m;
  static std::random_device device;  // the system's source (getrandom on Linux)
  std::lock_guard<std::mutex> lock(m);
  std::uniform_int_distribution<std::size_t> pick(0, kAlphabet.size() - 1);
  std::string code;
  for (std::size_t i = 0; i < kCodeLength; ++i) code += kAlphabet[pick(device)];
  return code;
}

std::string SeatRoster::normalise(std::string_view given) {
  std::string out;
  for (char c : given.substr(0, 64)) {
    if (c == ' ' || c == '-') continue;
    out += static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  }
  return out;
}

void SeatRoster::set(const std::vector<study::SeatDef>& seats) {
  std::vector<SeatStatus> fresh;
  for (const study::SeatDef& s : seats) {
    std::string code;
    do {  // distinct codes, so that a code names one seat
      code = draw_code();
    } while (std::any_of(fresh.begin(), fresh.end(), [&](const SeatStatus& o) { return o.join_code == code; }));
    fresh.push_back(SeatStatus{s.id, s.name, s.areas, code, false, 0, {}});
  }
  std::lock_guard<std::mutex> lock(mutex_);
  seats_ = std::move(fresh);
}

std::optional<SeatIdentity> SeatRoster::sign_in(std::string_view given) {
  const std::string code = normalise(given);
  std::lock_guard<std::mutex> lock(mutex_);
  SeatStatus* found = nullptr;
  for (SeatStatus& s : seats_) {  // every code compared, whatever matched, in time independent of the content
    unsigned char diff = code.size() == s.join_code.size() ? 0 : 1;
    for (std::size_t i = 0; i < s.join_code.size(); ++i)
      diff |= static_cast<unsigned char>((i < code.size() ? code[i] : 0) ^ s.join_code[i]);
    if (diff == 0) found = &s;
  }
  if (!found) return std::nullopt;
  found->joined = true;
  return SeatIdentity{found->id, found->name, found->areas};
}

std::optional<SeatIdentity> SeatRoster::find(const std::string& id) const {
  std::lock_guard<std::mutex> lock(mutex_);
  for (const SeatStatus& s : seats_)
    if (s.id == id) return SeatIdentity{s.id, s.name, s.areas};
  return std::nullopt;
}

bool SeatRoster::set_trainee(const std::string& id, const std::string& name) {
  std::lock_guard<std::mutex> lock(mutex_);
  for (SeatStatus& s : seats_)
    if (s.id == id) {
      s.trainee = name;
      return true;
    }
  return false;
}

void SeatRoster::stream(const std::string& id, int delta) {
  std::lock_guard<std::mutex> lock(mutex_);
  for (SeatStatus& s : seats_)
    if (s.id == id) {
      if (delta > 0) ++s.streams;
      else if (s.streams > 0) --s.streams;
    }
}

std::vector<SeatStatus> SeatRoster::list() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return seats_;
}

bool SeatRoster::any() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return !seats_.empty();
}

}  // namespace droopline::server
