#pragma once
// The list of turbine models. Adding a type: its description file and one entry below (and the
// enumerator in TurbineType, same position).
#include <cstddef>

#include "models/battery.hpp"
#include "models/gas.hpp"
#include "models/hydro.hpp"
#include "models/reheat.hpp"
#include "models/steam.hpp"

namespace droopline::detail {

/// A compile-time list of model descriptions.
template <class... Ms>
struct ModelList {
  static constexpr std::size_t kSize = sizeof...(Ms);
};

/// Every model, in TurbineType order (the block order of the state layout).
using Models = ModelList<Steam, Reheat, Hydro, Gas, Battery>;

/// Number of turbine models.
inline constexpr std::size_t kModelCount = Models::kSize;

template <class... Ms>
constexpr bool in_type_order(ModelList<Ms...>) {
  std::size_t i = 0;
  return ((static_cast<std::size_t>(Ms::kType) == i++) && ...);
}
static_assert(in_type_order(Models{}), "Models must list the types in TurbineType order");

/// Calls f(M{}) with the description M of `type`.
template <class F, class... Ms>
void visit_model(ModelList<Ms...>, TurbineType type, F&& f) {
  (void)((Ms::kType == type ? (f(Ms{}), true) : false) || ...);
}
/// Calls f(M{}) with the description M of `type`.
template <class F>
void with_model(TurbineType type, F&& f) {
  visit_model(Models{}, type, f);
}

}  // namespace droopline::detail
