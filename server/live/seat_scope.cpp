#include "seat_scope.hpp"

#include <algorithm>

namespace droopline {
namespace {

std::string listed(const std::vector<std::string>& ids) {
  std::string out;
  for (const std::string& id : ids) out += (out.empty() ? "" : ", ") + id;
  return out;
}

}  // namespace

bool answers_for(const SeatScope& scope, std::string_view area) {
  return std::find(scope.areas.begin(), scope.areas.end(), area) != scope.areas.end();
}

bool seat_may_send(CommandKind kind) {
  switch (kind) {
    case CommandKind::setpoint:
    case CommandKind::unit_start:
    case CommandKind::unit_stop:
    case CommandKind::agc:
    case CommandKind::schedule:
    case CommandKind::shed:
    case CommandKind::restore:
      return true;
    default:
      return false;
  }
}

std::vector<Issue> outside_scope(const CheckedSystem& system, const std::vector<Command>& commands,
                                 const SeatScope& scope) {
  std::vector<Issue> issues;
  const SystemDef& def = system.def();
  const std::string seat = "seat \"" + scope.seat + "\"";
  for (std::size_t i = 0; i < commands.size(); ++i) {
    const Command& c = commands[i];
    const std::string at = "commands[" + std::to_string(i) + "]";
    if (!seat_may_send(c.kind)) {
      issues.push_back({at, seat + " may not send " + to_string(c.kind) +
                                ": load changes, trips, ties, governor settings and fluctuation are the instructor's"});
      continue;
    }
    if (!c.unit.empty()) {
      const auto u = system.index().unit(c.unit);
      if (!u) continue;  // resolve_all names it
      const std::string& area = def.units[u->index].area;
      if (!answers_for(scope, area))
        issues.push_back({at + ".unit", "unit \"" + c.unit + "\" is in area \"" + area + "\", which " + seat +
                                            " does not answer for (its areas: " + listed(scope.areas) + ")"});
    } else if (system.index().area(c.area) && !answers_for(scope, c.area)) {
      issues.push_back({at + ".area", "area \"" + c.area + "\" is not one " + seat +
                                          " answers for (its areas: " + listed(scope.areas) + ")"});
    }
  }
  return issues;
}

}  // namespace droopline
