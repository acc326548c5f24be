#pragma once
// What the scenario and command readers and writers share: the JSON type, the field Reader that
// records every problem with its path, the file names of the enumerations, and the fields of
// each command kind.
#include <algorithm>
#include <cstdint>
#include <initializer_list>
#include <nlohmann/json.hpp>
#include <optional>
#include <set>
#include <span>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline::detail {

// Objects as small vectors of pairs: far fewer allocations than std::map for the many small
// objects of a large fleet, lookups over a dozen keys as fast, and output in insertion order.
using json = nlohmann::ordered_json;
using ijson = json;

inline std::string join(const std::string& path, std::string_view key) {
  std::string out;
  out.reserve(path.size() + 1 + key.size());
  if (!path.empty()) (out += path) += '.';
  return out += key;
}

inline const char* type_name(const ijson& j) {
  switch (j.type()) {
    case ijson::value_t::null:
      return "null";
    case ijson::value_t::object:
      return "an object";
    case ijson::value_t::array:
      return "an array";
    case ijson::value_t::string:
      return "a string";
    case ijson::value_t::boolean:
      return "a boolean";
    case ijson::value_t::number_integer:
    case ijson::value_t::number_unsigned:
    case ijson::value_t::number_float:
      return "a number";
    default:
      return "something else";
  }
}

/// The value an enumeration's file name stands for, or nullptr.
template <class E>
const E* value_named(const std::vector<std::pair<const char*, E>>& options, std::string_view name) {
  for (const auto& [n, value] : options)
    if (name == n) return &value;
  return nullptr;
}

// Reads fields out of JSON objects, recording every problem with its path.
class Reader {
 public:
  /// Records problems in `issues`; past `max_listed` of them they are only counted (the scenario
  /// loader's limit: a text of a million bad units would otherwise take gigabytes to list).
  explicit Reader(std::vector<Issue>& issues, std::size_t max_listed = SIZE_MAX)
      : issues_(issues), max_listed_(max_listed) {}

  void error(const std::string& path, const std::string& message) { add({path, message, false}); }
  /// Moves another reader's problems here (as many as are still listed) and its count.
  void take(std::vector<Issue>&& more, std::size_t more_unlisted) {
    for (Issue& issue : more) add(std::move(issue));
    unlisted_ += more_unlisted;
  }
  /// Problems found but not listed.
  std::size_t unlisted() const { return unlisted_; }
  /// Whether any problem was found.
  bool failed() const { return !issues_.empty() || unlisted_ > 0; }

  bool object(const ijson& j, const std::string& path, std::initializer_list<std::string_view> allowed) {
    return object(j, path, std::span<const std::string_view>(allowed.begin(), allowed.size()));
  }
  bool object(const ijson& j, const std::string& path, std::span<const std::string_view> allowed) {
    if (!j.is_object()) {
      error(path, std::string("must be an object, got ") + type_name(j));
      return false;
    }
    for (auto it = j.begin(); it != j.end(); ++it)
      if (std::find(allowed.begin(), allowed.end(), it.key()) == allowed.end())
        error(join(path, it.key()), "unknown field");
    return true;
  }

  const ijson* field(const ijson& obj, std::string_view key, const std::string& path, bool required) {
    auto it = obj.find(key);
    if (it == obj.end()) {
      if (required) error(join(path, key), "required");
      return nullptr;
    }
    return &*it;
  }

  void number(const ijson& obj, std::string_view key, const std::string& path, double& out, bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_number())
        out = v->get<double>();
      else
        error(join(path, key), std::string("must be a number, got ") + type_name(*v));
    }
  }

  void number(const ijson& obj, std::string_view key, const std::string& path, std::optional<double>& out) {
    double v = 0.0;
    const std::size_t before = issues_.size();
    if (!obj.contains(key)) return;
    number(obj, key, path, v, true);
    if (issues_.size() == before) out = v;
  }

  void string(const ijson& obj, std::string_view key, const std::string& path, std::string& out,
              bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_string())
        out = v->get<std::string>();
      else
        error(join(path, key), std::string("must be a string, got ") + type_name(*v));
    }
  }

  void boolean(const ijson& obj, std::string_view key, const std::string& path, bool& out, bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_boolean())
        out = v->get<bool>();
      else
        error(join(path, key), std::string("must be true or false, got ") + type_name(*v));
    }
  }

  template <class E>
  bool choice(const ijson& obj, std::string_view key, const std::string& path,
              const std::vector<std::pair<const char*, E>>& options, E& out, bool required = false) {
    const ijson* v = field(obj, key, path, required);
    if (!v) return false;
    if (const E* named = v->is_string() ? value_named(options, v->get_ref<const std::string&>()) : nullptr) {
      out = *named;
      return true;
    }
    std::string names;
    for (auto& option : options) names += (names.empty() ? "" : ", ") + std::string("\"") + option.first + "\"";
    error(join(path, key), "must be one of " + names + ", got " +
                               (v->is_string() ? "\"" + v->get<std::string>() + "\"" : type_name(*v)));
    return false;
  }

  const ijson* array(const ijson& obj, std::string_view key, const std::string& path, bool required = false) {
    const ijson* v = field(obj, key, path, required);
    if (v && !v->is_array()) {
      error(join(path, key), std::string("must be an array, got ") + type_name(*v));
      return nullptr;
    }
    return v;
  }

 private:
  void add(Issue&& issue) {
    if (issues_.size() >= max_listed_)
      ++unlisted_;
    else
      issues_.push_back(std::move(issue));
  }

  std::vector<Issue>& issues_;
  std::size_t max_listed_;
  std::size_t unlisted_ = 0;
};

/// File names of the enumerations.
inline const std::vector<std::pair<const char*, TurbineType>> kTurbineNames = {{"steam", TurbineType::steam},
                                                                               {"reheat", TurbineType::reheat},
                                                                               {"hydro", TurbineType::hydro},
                                                                               {"gas", TurbineType::gas},
                                                                               {"battery", TurbineType::battery}};
inline const std::vector<std::pair<const char*, GovernorMode>> kModeNames = {
    {"droop", GovernorMode::droop}, {"isochronous", GovernorMode::isochronous}};
inline const std::vector<std::pair<const char*, DeadbandKind>> kDeadbandNames = {{"offset", DeadbandKind::offset},
                                                                                 {"step", DeadbandKind::step}};
inline const std::vector<std::pair<const char*, CommandKind>> kCommandNames = {
    {"load_step", CommandKind::load_step},
    {"load_ramp", CommandKind::load_ramp},
    {"unit_trip", CommandKind::unit_trip},
    {"unit_start", CommandKind::unit_start},
    {"setpoint", CommandKind::setpoint},
    {"governor", CommandKind::governor},
    {"tie_trip", CommandKind::tie_trip},
    {"tie_close", CommandKind::tie_close},
    {"agc", CommandKind::agc},
    {"fluctuation", CommandKind::fluctuation},
    {"unit_stop", CommandKind::unit_stop},
    {"schedule", CommandKind::schedule},
    {"shed", CommandKind::shed},
    {"restore", CommandKind::restore}};
inline const std::vector<std::pair<const char*, AgcMode>> kAgcModeNames = {
    {"tie_line_bias", AgcMode::tie_line_bias},
    {"constant_frequency", AgcMode::constant_frequency},
    {"constant_interchange", AgcMode::constant_interchange}};

// Fields each command kind takes (besides "kind" and, for events, "at_s"), and which are required.
struct KindFields {
  std::set<std::string> allowed;
  std::set<std::string> required;
};

/// The fields of a command kind.
const KindFields& fields_of(CommandKind k);

/// Reads one command (with `at_s` into *at_s when `with_time`), or nothing after an error.
std::optional<Command> read_command(Reader& r, const ijson& j, const std::string& path, bool with_time, double* at_s);

}  // namespace droopline::detail
