#pragma once
// The bodies of POST /api/v1/fits and POST /api/v1/injections: read and checked field by field, each
// problem as `field: message` (`recording.text: recording.csv line 12 ...`, `params[1]: ...`), so the
// route answers 400 before anything runs. No sockets, no jobs: test_api can call these directly.
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/fit.hpp"
#include "droopline/inject.hpp"
#include "droopline/recording.hpp"

namespace droopline::server {

/// A posted recording, not yet read (reading needs the scenario for the default column names).
struct PostedRecording {
  bool comtrade = false;            ///< "format": "comtrade" (else "csv")
  std::string text;                 ///< csv: the file's text
  std::string cfg;                  ///< comtrade: the .cfg's text
  std::string dat;                  ///< comtrade: the .dat's bytes (ASCII text, or decoded from base64)
  std::string dat_field = "dat";    ///< which field carried the .dat ("dat" or "dat_base64"), for messages
  std::string name;                 ///< the file name shown in messages (recording.csv / recording.cfg)
  study::RecordingOptions options;  ///< time, frequency and power columns as given (empty: defaults), bases
  std::string power_column;         ///< as given, or empty for `UNIT.p_mw`
};

/// A checked fit request.
struct FitRequest {
  std::optional<nlohmann::ordered_json> scenario;  ///< posted scenario (passed the JSON gate), or the loaded one
  std::string unit;                                ///< unit id
  std::vector<study::FitParam> params;             ///< 1 to 8, paths distinct
  unsigned starts = 4;                             ///< 1 to 32
  std::uint64_t seed = 1;
  std::optional<double> threshold_hz;  ///< excursion threshold (Hz), above 0
  PostedRecording recording;
};

/// Reads the body of POST /api/v1/fits; nullopt with every problem, each naming its field.
std::optional<FitRequest> read_fit_request(std::string_view body, std::vector<std::string>& problems);

/// The fit `req` asks of the scenario `def`: the unit checked, the recording read (droopline's own
/// column names by default, as `droopline fit`), then `study::check_fit`; nullopt with the problems.
std::optional<study::FitSpec> build_fit_spec(const FitRequest& req, const SystemDef& def,
                                             std::vector<std::string>& problems);

/// A checked injection request.
struct InjectionRequest {
  std::optional<nlohmann::ordered_json> scenario;  ///< posted scenario, or the loaded one
  std::string unit;
  study::InjectProfile profile;
};

/// Reads the body of POST /api/v1/injections; nullopt with every problem, each naming its field.
std::optional<InjectionRequest> read_injection_request(std::string_view body, std::vector<std::string>& problems);

/// Runs the request on the scenario `scenario_text`: `{"unit", "profile", "note", "passed", "tests",
/// "plots"}` with `status` 200, or an error body with `status` 400.
nlohmann::ordered_json run_injection_request(const InjectionRequest& req, const std::string& scenario_text,
                                             int& status);

/// Standard base64 (RFC 4648, with padding; line breaks allowed); nullopt with `error` naming the
/// first bad character's offset.
std::optional<std::string> decode_base64(std::string_view text, std::string& error);

}  // namespace droopline::server
