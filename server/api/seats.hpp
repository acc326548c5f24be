#pragma once
// The operator seats of the running exercise and their join codes. A seat proves itself with its
// code (`Authorization: Bearer CODE`, or the WebSocket `auth` message), short enough for a trainee
// to type; the instructor reads the codes from GET /api/v1/seats. Thread-safe: the I/O threads
// check codes, the exercise loader replaces the seats.
#include <cstddef>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "droopline/exercise.hpp"

namespace droopline::server {

/// One seat as the instructor sees it.
struct SeatStatus {
  std::string id;
  std::string name;
  std::vector<std::string> areas;
  std::string join_code;
  bool joined = false;       ///< its code has been used since the exercise was loaded
  std::size_t streams = 0;   ///< streaming clients signed in as this seat now
  std::string trainee;       ///< the name the trainee entered when joining ("" until then)
};

/// A seat's identity as a request carries it.
struct SeatIdentity {
  std::string id;
  std::string name;
  std::vector<std::string> areas;
};

class SeatRoster {
 public:
  /// Join codes: kCodeLength characters from an alphabet without look-alikes (no 0/O, 1/I/L).
  static constexpr std::size_t kCodeLength = 6;
  static constexpr std::string_view kAlphabet = "ABCDEFGHJKMNPQRSTUVWXYZ23456789";

  /// Replaces the seats (an exercise was loaded: none when no exercise runs) and draws a new code for
  /// each from the system's random source; the old codes stop working.
  void set(const std::vector<study::SeatDef>& seats);
  /// The seat whose code `given` is (case and surrounding spaces ignored; every code compared in
  /// constant time), marked as joined; nullopt when it is no seat's code.
  std::optional<SeatIdentity> sign_in(std::string_view given);
  /// The seat `id` as it stands now (nullopt once an exercise without it was loaded).
  std::optional<SeatIdentity> find(const std::string& id) const;
  /// Seat `id`'s trainee is `name` (already checked); false when there is no such seat now.
  bool set_trainee(const std::string& id, const std::string& name);
  /// A streaming client signed in as seat `id` opened (+1) or closed (-1).
  void stream(const std::string& id, int delta);
  /// Every seat with its code, in the file's order.
  std::vector<SeatStatus> list() const;
  /// True when there are seats.
  bool any() const;

  /// A fresh join code (exposed for the tests of its form).
  static std::string draw_code();
  /// `given` as a code: upper case, spaces and dashes removed.
  static std::string normalise(std::string_view given);

 private:
  mutable std::mutex mutex_;
  std::vector<SeatStatus> seats_;
};

}  // namespace droopline::server
