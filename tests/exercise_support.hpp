#pragma once
// Helpers shared by the exercise and objective tests: an exercise that must load, and the errors
// of one that must not.
#include <fstream>
#include <sstream>
#include <string>

#include "droopline/exercise.hpp"
#include "support.hpp"

namespace test {

/// The text of a file of the source tree (`rel` from its root).
inline std::string read_source(const std::string& rel) {
  std::ifstream in(source_path(rel));
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

/// Parses `text` (a scenario path relative to `base`) and requires it to load, showing why not.
inline droopline::study::Exercise load_ok(const std::string& text, const std::string& base = "") {
  droopline::study::ExerciseLoad r = droopline::study::parse_exercise(text, base);
  std::string msgs;
  for (const auto& i : r.issues) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(r.exercise);
  return std::move(*r.exercise);
}

/// Parses `text`, checks that it is refused, and gives its errors one a line.
inline std::string errors_of(const std::string& text, const std::string& base = "") {
  droopline::study::ExerciseLoad r = droopline::study::parse_exercise(text, base);
  CHECK_FALSE(r.exercise);
  std::string msgs;
  for (const auto& i : r.issues)
    if (!i.warning) msgs += i.text() + "\n";
  return msgs;
}

}  // namespace test
