// libFuzzer target: scenario JSON text to a validated scenario or an error list. Any crash,
// sanitizer report, hang or leak is a finding; every input must give a definition or issues.
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "droopline/engine.hpp"
#include "droopline/scenario_io.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  droopline::LoadResult r = droopline::parse_scenario(text);
  if (!r.system && r.issues.empty()) std::abort();  // refused without saying why
  if (r.system) {
    // A valid scenario must also make an engine and survive a few steps.
    auto engine = droopline::Engine::create(*r.system);
    for (int i = 0; i < 20 && !engine->finished(); ++i) engine->step();
  }
  return 0;
}
