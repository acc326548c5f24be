#pragma once
/// Typed ids of a system's areas, units and ties: dense indices in file order, resolved from the
/// scenario's string ids once at the boundary (SystemIndex) and checked when used.
#include <cstdint>

namespace droopline {

/// Dense index of an area, checked when used.
struct AreaId {
  std::uint32_t index = 0;  ///< position in SystemDef::areas
};
/// Dense index of a unit (file order), checked when used.
struct UnitId {
  std::uint32_t index = 0;  ///< position in SystemDef::units
};
/// Dense index of a tie, checked when used.
struct TieId {
  std::uint32_t index = 0;  ///< position in SystemDef::ties
};

}  // namespace droopline
