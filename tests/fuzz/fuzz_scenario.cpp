// libFuzzer target: scenario JSON text to a validated scenario or an error list. Any crash,
// sanitizer report, hang or leak is a finding; every input must give a definition or issues.
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include <nlohmann/json.hpp>

#include "droopline/engine.hpp"
#include "droopline/scenario_io.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  droopline::LoadResult r = droopline::parse_scenario(text);
  if (!r.system && r.issues.empty()) std::abort();  // refused without saying why
  // The units read from the parser's events (the default) and from their documents must give
  // the same problems and the same definition.
  const droopline::LoadResult slow = droopline::detail::parse_scenario(text, {.units_from_events = false});
  if (slow.issues.size() != r.issues.size() || slow.system.has_value() != r.system.has_value()) std::abort();
  for (std::size_t i = 0; i < r.issues.size(); ++i)
    if (slow.issues[i].text() != r.issues[i].text()) std::abort();
  if (r.system && droopline::scenario_to_json(r.system->def()).dump() != droopline::scenario_to_json(slow.system->def()).dump())
    std::abort();
  if (r.system) {
    // A valid scenario must also make an engine and survive a few steps.
    auto engine = droopline::Engine::create(*r.system);
    for (int i = 0; i < 20 && !engine->finished(); ++i) engine->step();
  }
  return 0;
}
