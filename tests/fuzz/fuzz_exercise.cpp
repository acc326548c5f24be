// libFuzzer target: exercise JSON text (scenario inline: no folder is given) to a checked exercise
// or an error list. Any crash, sanitizer report, hang or leak is a finding; every input must give
// an exercise or issues, and a valid one must run its script, alarm and objective monitors for a
// few steps, and read back from its own JSON (exercise_to_json).
#include <cstdint>
#include <cstdlib>
#include <nlohmann/json.hpp>
#include <string_view>

#include "droopline/alarms.hpp"
#include "droopline/engine.hpp"
#include "droopline/exercise.hpp"
#include "droopline/objectives.hpp"
#include "droopline/script.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  droopline::study::ExerciseLoad r = droopline::study::parse_exercise(text, "");
  if (!r.exercise && r.issues.empty()) std::abort();  // refused without saying why
  if (r.exercise) {
    auto engine = droopline::Engine::create(r.exercise->system);
    droopline::study::ScriptRunner script(r.exercise->system, r.exercise->def.script);
    droopline::study::AlarmMonitor alarms(r.exercise->system, r.exercise->def.alarms);
    droopline::study::ObjectiveMonitor objectives(*r.exercise);
    for (int i = 0; i < 20; ++i) {
      engine->step();
      alarms.update(*engine, engine->take_notices());
      objectives.update(*engine, &alarms);
      script.due(*engine, 2);
    }
    for (const auto& s : objectives.scores(&alarms)) (void)droopline::study::seat_score_to_json(s).dump();
    if (!droopline::study::parse_exercise(droopline::study::exercise_to_json(*r.exercise).dump(), "").exercise)
      std::abort();  // an exercise that does not read back from its own JSON
  }
  return 0;
}
