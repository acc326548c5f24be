// libFuzzer target: one command body (an object or an array), as HTTP or WebSocket would get it,
// parsed, resolved, and then checked and applied against the demo scenario.
#include <cstdint>
#include <cstdlib>
#include <memory>
#include <string_view>

#include "droopline/engine.hpp"
#include "droopline/scenario_io.hpp"

namespace {
std::unique_ptr<droopline::Engine> make_engine() {
  auto r = droopline::load_scenario_file(DROOPLINE_SOURCE_DIR "/scenarios/demo_three_areas.json");
  if (!r.system) std::abort();
  return droopline::Engine::create(*r.system);
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static auto engine = make_engine();
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  droopline::CommandParse cp = droopline::parse_commands(text);
  if (cp.commands.empty() && cp.issues.empty()) std::abort();
  if (!cp.commands.empty()) {
    const droopline::Resolved resolved = droopline::resolve_all(engine->system(), cp.commands);
    if (!resolved.issues.empty() && !resolved.actions.empty()) std::abort();  // refused means nothing to apply
    const auto check = engine->check_all(resolved.actions);
    const auto applied = engine->apply_all(resolved.actions);
    if (check.ok != applied.ok) std::abort();  // the check must predict the apply
    engine->step();
  }
  return 0;
}
