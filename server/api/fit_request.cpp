// Reading the fit and injection bodies: every field checked for its type and range, every problem
// named by its field, nothing run until all of it has passed.
#include "fit_request.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <set>

#include "api.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/playback.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::server {
namespace {

using json = nlohmann::ordered_json;

constexpr std::size_t kMaxParams = 8;
constexpr unsigned kMaxStarts = 32;
constexpr std::size_t kMaxName = 120;  // column names and the file name shown in messages

// A short printable name (a column, a file name); false with a problem at `field`.
bool read_name(const json& j, const std::string& key, const std::string& field, std::string& out,
               std::vector<std::string>& problems) {
  if (!j.contains(key)) return true;
  const json& v = j[key];
  bool ok = v.is_string() && !v.get<std::string>().empty() && v.get<std::string>().size() <= kMaxName;
  if (ok)
    for (unsigned char ch : v.get<std::string>()) ok = ok && ch >= 0x20 && ch != 0x7f;
  if (!ok) {
    problems.push_back(field + ": must be a string of 1 to " + std::to_string(kMaxName) + " printable characters");
    return false;
  }
  out = v.get<std::string>();
  return true;
}

// A finite number within [lo, hi] (lo excluded when `open_lo`); false with a problem at `field`.
bool read_number(const json& j, const std::string& key, const std::string& field, double lo, double hi, bool open_lo,
                 std::optional<double>& out, std::vector<std::string>& problems) {
  if (!j.contains(key)) return true;
  const json& v = j[key];
  const double x = v.is_number() ? v.get<double>() : NAN;
  if (!v.is_number() || !std::isfinite(x) || (open_lo ? !(x > lo) : !(x >= lo)) || !(x <= hi)) {
    problems.push_back(field + ": must be a number " + (open_lo ? "above " : "from ") + fmt_num(lo) +
                       (open_lo ? " and up to " : " to ") + fmt_num(hi) +
                       (v.is_number() ? ", got " + fmt_num(x) : ", got " + std::string(v.type_name())));
    return false;
  }
  out = x;
  return true;
}

void read_recording_body(const json& r, PostedRecording& rec, std::vector<std::string>& problems) {
  if (!r.is_object()) {
    problems.push_back(
        "recording: required, an object {\"format\": \"csv\", \"text\": ...} or "
        "{\"format\": \"comtrade\", \"cfg\": ..., \"dat\" or \"dat_base64\": ...}");
    return;
  }
  const std::string format = r.contains("format") && r["format"].is_string() ? r["format"].get<std::string>() : "";
  if (format != "csv" && format != "comtrade") {
    problems.push_back("recording.format: must be \"csv\" or \"comtrade\"");
    return;
  }
  rec.comtrade = format == "comtrade";
  rec.name = rec.comtrade ? "recording.cfg" : "recording.csv";
  if (rec.comtrade)
    unknown_fields(r, {"format", "cfg", "dat", "dat_base64", "frequency_column", "power_column", "base_mw", "base_hz"},
                   problems, "recording.");
  else
    unknown_fields(r, {"format", "text", "time_column", "frequency_column", "power_column", "base_mw", "base_hz"},
                   problems, "recording.");
  auto text_field = [&](const std::string& key, std::string& out) {
    if (!r.contains(key)) return false;
    if (!r[key].is_string() || r[key].get<std::string>().empty()) {
      problems.push_back("recording." + key + ": must be a non-empty string");
      return false;
    }
    out = r[key].get<std::string>();
    return true;
  };
  if (!rec.comtrade) {
    if (!r.contains("text")) problems.push_back("recording.text: required, the CSV file's text");
    text_field("text", rec.text);
    read_name(r, "time_column", "recording.time_column", rec.options.time_column, problems);
  } else {
    if (!r.contains("cfg")) problems.push_back("recording.cfg: required, the .cfg file's text");
    text_field("cfg", rec.cfg);
    if (r.contains("dat") == r.contains("dat_base64"))
      problems.push_back(
          "recording.dat: give exactly one of \"dat\" (an ASCII .dat's text) and \"dat_base64\" "
          "(a binary .dat in base64)");
    else if (r.contains("dat"))
      text_field("dat", rec.dat);
    else if (std::string b64; text_field("dat_base64", b64)) {
      rec.dat_field = "dat_base64";
      std::string err;
      auto bytes = decode_base64(b64, err);
      if (!bytes)
        problems.push_back("recording.dat_base64: " + err);
      else
        rec.dat = std::move(*bytes);
    }
  }
  read_name(r, "frequency_column", "recording.frequency_column", rec.options.frequency_column, problems);
  read_name(r, "power_column", "recording.power_column", rec.power_column, problems);
  std::optional<double> base_mw, base_hz;
  // Bounds of the scenario's checks: ratings up to 2e6 MW, nominal frequency 10 to 1000 Hz.
  read_number(r, "base_mw", "recording.base_mw", 0.0, 2e6, true, base_mw, problems);
  read_number(r, "base_hz", "recording.base_hz", 10.0, 1000.0, false, base_hz, problems);
  if (base_mw.has_value() != base_hz.has_value())
    problems.push_back(std::string("recording.") + (base_mw ? "base_hz" : "base_mw") +
                       ": per-unit recordings need both base_mw and base_hz");
  if (base_mw && base_hz) {
    rec.options.units = study::RecordingUnits::per_unit;
    rec.options.base_mw = *base_mw;
    rec.options.base_hz = *base_hz;
  }
}

// The field a recording reader's issue is about: the .dat's field when it names the data file.
std::string recording_field(const PostedRecording& rec, const Issue& issue) {
  if (!rec.comtrade) return "recording.text";
  const std::string dat_name = rec.name.substr(0, rec.name.size() - 4) + ".dat";
  return issue.path.rfind(dat_name, 0) == 0 ? "recording." + rec.dat_field : "recording.cfg";
}

// The scenario, unit and the rest of a body parsed once through the JSON gate.
std::optional<json> object_body(std::string_view body, const char* expected, std::vector<std::string>& problems) {
  std::string bad;
  auto j = parse_untrusted_json(body, bad);
  if (!j) {
    problems.push_back(bad);
    return std::nullopt;
  }
  if (!j->is_object()) {
    problems.push_back(std::string("body: must be a JSON object ") + expected);
    return std::nullopt;
  }
  return j;
}

void read_scenario_and_unit(const json& j, std::optional<json>& scenario, std::string& unit,
                            std::vector<std::string>& problems) {
  if (j.contains("scenario")) {
    if (j["scenario"].is_object())
      scenario = j["scenario"];
    else
      problems.push_back("scenario: must be an object (a scenario)");
  }
  if (j.contains("unit") && !j["unit"].is_string())
    problems.push_back(std::string("unit: must be a string, the id of a unit of the scenario, got ") +
                       j["unit"].type_name());
  else if (!j.contains("unit") || j["unit"].get<std::string>().empty())
    problems.push_back("unit: required, the id of a unit of the scenario");
  else
    unit = j["unit"].get<std::string>();
}

}  // namespace

std::optional<std::string> decode_base64(std::string_view text, std::string& error) {
  std::string out;
  out.reserve(text.size() / 4 * 3);
  std::uint32_t acc = 0;
  int bits = 0, pad = 0;
  std::size_t symbols = 0;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (c == '\n' || c == '\r') continue;  // line breaks of wrapped base64 (RFC 2045)
    int v = -1;
    if (c >= 'A' && c <= 'Z') v = c - 'A';
    if (c >= 'a' && c <= 'z') v = c - 'a' + 26;
    if (c >= '0' && c <= '9') v = c - '0' + 52;
    if (c == '+') v = 62;
    if (c == '/') v = 63;
    if (c == '=' && symbols % 4 >= 2 && pad < 2) {
      ++pad;
      ++symbols;
      continue;
    }
    if (v < 0 || pad > 0) {
      error = "character " + quote_cut(std::string_view(&c, 1)) + " at offset " + std::to_string(i) +
              (v < 0 ? " is not base64" : " follows the padding");
      return std::nullopt;
    }
    ++symbols;
    acc = (acc << 6) | static_cast<std::uint32_t>(v);
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out.push_back(static_cast<char>((acc >> bits) & 0xFF));
    }
  }
  if (symbols % 4 != 0) {
    error = "length " + std::to_string(symbols) + " (without line breaks) is not a multiple of 4: cut short?";
    return std::nullopt;
  }
  return out;
}

std::optional<FitRequest> read_fit_request(std::string_view body, std::vector<std::string>& problems) {
  const std::size_t before = problems.size();
  const auto j = object_body(body, "{\"unit\", \"params\", \"recording\", ...}", problems);
  if (!j) return std::nullopt;
  FitRequest req;
  unknown_fields(*j, {"scenario", "unit", "params", "starts", "seed", "threshold_hz", "recording", "name"}, problems);
  read_scenario_and_unit(*j, req.scenario, req.unit, problems);
  if (!j->contains("params") || !(*j)["params"].is_array() || (*j)["params"].empty() ||
      (*j)["params"].size() > kMaxParams) {
    problems.push_back("params: required, a list of 1 to " + std::to_string(kMaxParams) + " \"PATH=LO:HI\"" +
                       ((*j).contains("params") && (*j)["params"].is_array()
                            ? ", got " + std::to_string((*j)["params"].size())
                            : std::string()));
  } else {
    std::set<std::string> seen;
    for (std::size_t k = 0; k < (*j)["params"].size(); ++k) {
      const json& p = (*j)["params"][k];
      const std::string field = "params[" + std::to_string(k) + "]";
      std::string err;
      auto fp = p.is_string() ? study::parse_fit_param(p.get<std::string>(), err) : std::nullopt;
      if (!p.is_string()) err = "must be a string PATH=LO:HI";
      if (err.rfind("--param ", 0) == 0) err.erase(0, 8);  // the command line's option, not a field here
      if (!fp)
        problems.push_back(field + ": " + err);
      else if (!seen.insert(fp->path).second)
        problems.push_back(field + ": " + quote_cut(fp->path) + " is given twice");
      else
        req.params.push_back(*fp);
    }
  }
  if (j->contains("starts")) {
    const json& v = (*j)["starts"];
    if (!v.is_number_unsigned() || v.get<std::uint64_t>() < 1 || v.get<std::uint64_t>() > kMaxStarts)
      problems.push_back("starts: must be a whole number from 1 to " + std::to_string(kMaxStarts));
    else
      req.starts = static_cast<unsigned>(v.get<std::uint64_t>());
  }
  if (j->contains("seed")) {
    if (!(*j)["seed"].is_number_unsigned())
      problems.push_back("seed: must be a whole number >= 0");
    else
      req.seed = (*j)["seed"].get<std::uint64_t>();
  }
  // An excursion beyond 5 Hz would be a collapse, not a governor response.
  // Below 1 mHz an excursion would be measurement noise (frequency transducers resolve about
  // 1 mHz: common practice), so every sample would count.
  read_number(*j, "threshold_hz", "threshold_hz", study::kMinThresholdHz, study::kMaxThresholdHz, false,
              req.threshold_hz, problems);
  if (!j->contains("recording"))
    problems.push_back("recording: required, {\"format\": \"csv\", \"text\": ...} or {\"format\": \"comtrade\", ...}");
  else
    read_recording_body((*j)["recording"], req.recording, problems);
  if (read_name(*j, "name", "name", req.recording.name, problems) && req.recording.comtrade) {
    std::string ext = req.recording.name.size() > 4 ? req.recording.name.substr(req.recording.name.size() - 4) : "";
    for (char& ch : ext) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
    if (ext != ".cfg")
      problems.push_back("name: a COMTRADE record's name ends in .cfg, got " + quote_cut(req.recording.name));
  }
  if (problems.size() > before) return std::nullopt;
  return req;
}

std::optional<study::FitSpec> build_fit_spec(const FitRequest& req, const SystemDef& def,
                                             std::vector<std::string>& problems) {
  std::string err;
  if (!study::playback_scenario(def, {req.unit}, def.duration_s, err)) {
    problems.push_back("unit: " + err);
    return std::nullopt;
  }
  const PostedRecording& posted = req.recording;
  study::RecordingOptions options = posted.options;
  if (!posted.power_column.empty()) options.power_columns = {posted.power_column};
  options = study::default_columns(def, {req.unit}, std::move(options));
  std::vector<Issue> issues;
  auto rec = posted.comtrade ? study::read_comtrade_recording_data(posted.cfg, posted.dat, posted.name, options, issues)
                             : study::read_csv_recording_text(posted.text, posted.name, options, issues);
  for (const Issue& i : issues)
    if (!i.warning) problems.push_back(recording_field(posted, i) + ": " + i.text());
  if (!rec) return std::nullopt;
  study::FitSpec spec;
  spec.playback.def = def;
  spec.playback.units = {req.unit};
  spec.playback.recording = std::move(*rec);
  spec.playback.threshold_hz = req.threshold_hz;
  spec.params = req.params;
  spec.starts = req.starts;
  spec.seed = req.seed;
  if (study::check_fit(spec, err)) return spec;
  // check_fit's lines: "--param PATH: ..." about one parameter, the rest about the recording.
  for (std::size_t at = 0; at <= err.size();) {
    const std::size_t nl = std::min(err.find('\n', at), err.size());
    std::string line = err.substr(at, nl - at);
    at = nl + 1;
    std::string field = "recording";
    for (std::size_t k = 0; k < req.params.size(); ++k)
      if (line.rfind("--param " + req.params[k].path + ":", 0) == 0) {
        field = "params[" + std::to_string(k) + "]";
        line.erase(0, 8);
      }
    problems.push_back(field + ": " + line);
  }
  return std::nullopt;
}

std::optional<InjectionRequest> read_injection_request(std::string_view body, std::vector<std::string>& problems) {
  const std::size_t before = problems.size();
  const auto j = object_body(body, "{\"unit\", \"profile\", \"scenario\"?}", problems);
  if (!j) return std::nullopt;
  InjectionRequest req;
  unknown_fields(*j, {"scenario", "unit", "profile"}, problems);
  read_scenario_and_unit(*j, req.scenario, req.unit, problems);
  if (!j->contains("profile") || !(*j)["profile"].is_object()) {
    problems.push_back("profile: required, an injection-test profile {\"name\", \"note\", \"tests\": [...]}");
  } else {
    std::vector<Issue> issues;
    auto profile = study::parse_inject_profile((*j)["profile"].dump(), issues);
    for (const Issue& i : issues)
      if (!i.warning) problems.push_back(i.path.empty() ? "profile: " + i.message : "profile." + i.text());
    if (profile) req.profile = std::move(*profile);
  }
  if (problems.size() > before) return std::nullopt;
  return req;
}

json run_injection_request(const InjectionRequest& req, const std::string& scenario_text, int& status) {
  status = 400;
  LoadResult loaded = parse_scenario(scenario_text);
  if (!loaded.system) return json::parse(error_json("invalid scenario", issue_texts(loaded.issues)));
  const SystemDef& def = loaded.system->def();
  std::string err;
  if (!study::playback_scenario(def, {req.unit}, def.duration_s, err))
    return json::parse(error_json("injection test refused", {"unit: " + err}));
  const auto out = study::run_injection(def, req.unit, req.profile, err);
  if (!out) return json::parse(error_json("injection test refused", {err}));
  bool passed = true;
  json plots = json::array();
  for (const study::InjectOutcome& o : *out) {
    passed = passed && o.passed;
    plots.push_back(study::inject_svg(o));
  }
  status = 200;
  return {{"unit", req.unit},
          {"profile", req.profile.name},
          {"note", req.profile.note},
          {"passed", passed},
          {"tests", study::inject_to_json(*out)["tests"]},
          {"plots", std::move(plots)}};
}

}  // namespace droopline::server
