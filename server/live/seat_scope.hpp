#pragma once
// What an operator seat may command: its own areas' units (setpoint, start, controlled stop), its
// areas' secondary control, schedule and load (shed, restore). Everything else (load changes,
// trips, ties, governor settings, fluctuation) is the instructor's, who plays the rest of the world.
#include <string>
#include <string_view>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline {

/// The seat a command batch comes from, with the areas it answers for.
struct SeatScope {
  std::string seat;                ///< seat id
  std::vector<std::string> areas;  ///< area ids
};

/// True when `area` (an area id) is one `scope` answers for.
bool answers_for(const SeatScope& scope, std::string_view area);

/// True for the command kinds a seat may send (within its areas).
bool seat_may_send(CommandKind kind);

/// The commands of `commands` that `scope` may not send, one issue each (`commands[i]` or
/// `commands[i].unit`/`.area`, in words); empty when all are the seat's. Ids the system does not
/// know are left to `resolve_all`, which refuses them with its own message.
std::vector<Issue> outside_scope(const CheckedSystem& system, const std::vector<Command>& commands,
                                 const SeatScope& scope);

}  // namespace droopline
