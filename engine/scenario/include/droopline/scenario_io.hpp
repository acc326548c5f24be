#pragma once
/// The boundary between files and the engine: scenario and command parsing (JSON text to
/// validated definitions, or every problem as `path: message`), and the run outputs
/// (series CSV rows and the summary JSON).
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/defs.hpp"
#include "droopline/engine.hpp"
#include "droopline/validate.hpp"

namespace droopline {

/// A parsed and checked scenario, or the reasons there is none.
struct LoadResult {
  std::optional<CheckedSystem> system;  ///< set only when there are no errors
  std::vector<Issue> issues;            ///< errors first, then warnings
};

/// Parses JSON text into a checked system (definition and initial flows). Unknown fields, wrong types, missing required
/// fields, duplicate keys and every semantic problem of validate() are reported together.
LoadResult parse_scenario(std::string_view json_text);
namespace detail {
struct ParseOptions {
  /// A fleet's well-formed units read straight from the parser's events (the default); false
  /// reads every unit from its own small document, as the tests compare.
  bool units_from_events = true;
  std::size_t* units_read_from_events = nullptr;  ///< when set, counts them (for the tests)
};
LoadResult parse_scenario(std::string_view json_text, const ParseOptions& options);
}  // namespace detail
/// Reads a file and parses it; an unreadable file is one error under the path "file".
LoadResult load_scenario_file(const std::string& path);
/// The whole text of a regular file in one read, or nothing with one error under the path
/// "file" (not a regular file: a folder would "open" and report a huge size; or a read failed).
std::optional<std::string> read_text_file(const std::string& path, std::vector<Issue>& issues);

/// Commands parsed from one JSON body (an object or an array of objects), without `at_s`.
struct CommandParse {
  std::vector<Command> commands;
  std::vector<Issue> issues;  ///< empty when every command parsed
};
/// Parses a command body; checks shape and types only (references and bounds: resolve()).
CommandParse parse_commands(std::string_view json_text);

/// The scenario as JSON in the file format (defaults made explicit).
nlohmann::ordered_json scenario_to_json(const SystemDef& def);
/// One command as JSON in the file format (no `at_s`).
nlohmann::ordered_json command_to_json(const Command& command);
/// The one readable line of a notice: summary.json, the live event log and stream, the command line.
std::string describe(const SystemDef& def, const Notice& notice);
/// A disturbance's causes at its start as one line (`; ` between them).
std::string describe_cause(const SystemDef& def, const Disturbance& disturbance);
/// One disturbance record as JSON (null for metrics not reached).
nlohmann::ordered_json disturbance_to_json(const Engine& engine, const Disturbance& d);
/// The run summary: disturbances, final state, notices and warnings.
nlohmann::ordered_json summary_to_json(const Engine& engine, const std::vector<Notice>& notices,
                               const std::vector<Issue>& warnings);

/// JSON text with one line per object or array of scalars (one line per unit, per area...),
/// indented above that: readable by people, and quicker to write for large fleets.
std::string to_text(const nlohmann::ordered_json& doc);

/// Formats series rows as CSV with a fixed, locale-free number format (shortest round trip).
class SeriesCsv {
 public:
  /// The header line (with newline) for an engine's columns.
  static std::string header(const Engine& engine);
  /// Appends the engine's current row (with newline) to `out`.
  void append_row(const Engine& engine, std::string& out);

 private:
  std::vector<double> row_;
};

}  // namespace droopline
