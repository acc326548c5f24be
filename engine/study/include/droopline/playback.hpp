#pragma once
/// Playback: units of a scenario driven by a given frequency (a recording, or an injected test
/// signal) imposed as their speed, with no swing equation (the grid is the recording). The units
/// step through the engine's own stage kernels (`Engine::step_imposed`), so the model played back
/// is the model of every other run.
#include <cstdint>
#include <functional>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "droopline/recording.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// The frequency (Hz) a step's four RK4 stage points see.
struct StagePoints {
  double f_hz[4];
};
/// The stage points of the step that starts at `t0_s` (from the playback's start) and lasts `h_s`.
using FrequencyAt = std::function<StagePoints(double t0_s, double h_s)>;

/// A measured frequency between its samples: per interval, the cubic through its two samples and two
/// more, each added on the side where the samples bend less (an essentially non-oscillatory choice:
/// a corner, such as a load step landing on a sample, is not carried into the intervals on its other
/// side); fewer points when the recording has fewer than four samples.
class FrequencyTrack {
 public:
  /// Times (s, strictly increasing, from any origin) and values (Hz).
  FrequencyTrack(std::vector<double> t_s, std::vector<double> f_hz);
  /// The value at `t_s` on the track's own time base; held beyond the ends. Safe from several threads.
  double at(double t_s) const;
  /// The stage points of an RK4 step of a unit driven by the track from `t0_s`: the track at the
  /// step's start, middle (stages 2 and 3) and end.
  StagePoints stages(double t0_s, double h_s) const;

 private:
  struct Piece {
    std::size_t first, degree;  // the samples first .. first + degree
    double c[4];                // Newton coefficients
  };
  std::vector<double> t_, f_;
  std::vector<Piece> pieces_;  // one per interval between samples
};

/// `options` with droopline's own names where none are given: the frequency of the first unit's area
/// (`AREA.f_hz`) and each unit's output (`UNIT.p_mw`); the command line and the service read alike.
RecordingOptions default_columns(const SystemDef& def, const std::vector<std::string>& unit_ids,
                                 RecordingOptions options);

/// The scenario reduced to what a playback needs: the units `unit_ids` (checked to exist), their
/// areas with their demand set to the units' setpoints, no ties, other units, events, shedding or
/// secondary control, `duration_s` long. Defaults are made explicit (every field a path may name is
/// there). Empty with `error` set when a unit is unknown.
std::optional<nlohmann::ordered_json> playback_scenario(const SystemDef& def, const std::vector<std::string>& unit_ids,
                                                        double duration_s, std::string& error);

/// Steps the units of `system` (a playback scenario) with `f_at` imposed on every area, and returns
/// each unit's output (MW) at each of `sample_s` (from 0, increasing, within the duration), the
/// output between two steps interpolated linearly. The run has floor(duration / step) steps; the
/// first `settle_steps` of them hold the frequency at `f_at`'s value at 0 and come before time 0
/// (the units settle where the recording starts), so they count in the duration.
std::vector<std::vector<double>> play(const CheckedSystem& system, const std::vector<std::string>& unit_ids,
                                      const FrequencyAt& f_at, const std::vector<double>& sample_s,
                                      std::int64_t settle_steps = 0);

/// An excursion of the measured frequency beyond the threshold and the response to it.
struct Excursion {
  double at_s = 0.0;                       ///< first sample beyond the threshold (s, recording time)
  double df_hz = 0.0;                      ///< its deviation f - f0 (Hz)
  std::optional<double> measured_10s_mw;   ///< measured change of output 10 s later (MW)
  std::optional<double> simulated_10s_mw;  ///< simulated change 10 s later (MW)
  std::optional<double> measured_30s_mw;   ///< measured change 30 s later (MW)
  std::optional<double> simulated_30s_mw;  ///< simulated change 30 s later (MW)
};

/// How one unit's simulated output compares with its measured output.
struct UnitFit {
  std::string unit;
  double rmse_mw = 0.0;         ///< root mean square of simulated - measured (MW)
  double max_error_mw = 0.0;    ///< largest |simulated - measured| (MW)
  double max_error_at_s = 0.0;  ///< where (s, recording time)
  std::vector<Excursion> excursions;
};

/// What a playback compares: one series per unit, on the recording's samples.
struct PlaybackResult {
  std::vector<double> t_s, f_hz;                  ///< recording times (s) and frequency (Hz) compared
  std::vector<std::vector<double>> measured_mw;   ///< per unit
  std::vector<std::vector<double>> simulated_mw;  ///< per unit
  std::vector<UnitFit> units;
  double threshold_hz = 0.0;  ///< excursion threshold |f - f0| (Hz)
  double nominal_hz = 50.0;
  std::vector<std::string> warnings;
};

/// The excursion thresholds a caller may ask for (Hz): below 1 mHz an excursion would be
/// measurement noise (frequency transducers resolve about 1 mHz: common practice), so every sample
/// would count; above 5 Hz no credible event would.
inline constexpr double kMinThresholdHz = 0.001;
/// The largest excursion threshold (Hz); see kMinThresholdHz.
inline constexpr double kMaxThresholdHz = 5.0;

/// A scenario, the units played and the recording with one power series per unit (same order).
struct PlaybackSpec {
  SystemDef def;                   ///< the scenario as loaded
  std::vector<std::string> units;  ///< unit ids, one per power series of the recording
  Recording recording;
  std::optional<double> threshold_hz;  ///< default: the widest deadband + 0.01 Hz; else within the range below
};

/// A playback prepared once for many runs (a fit runs it for each trial of its parameters).
struct PreparedPlayback {
  nlohmann::ordered_json scenario;  ///< the playback scenario (see playback_scenario)
  std::vector<std::string> units;
  FrequencyTrack track;
  std::vector<double> sample_s;   ///< recording samples compared, from the playback's start (s)
  std::vector<std::size_t> rows;  ///< their rows in the recording
  std::vector<std::string> warnings;
  /// A recording that starts off nominal beyond a unit's deadband: steps held at its first
  /// frequency before it starts, so the units start steady there rather than at nominal; 0 when it
  /// starts at rest. `start_mw` (per unit) is the measured output the units must then start at:
  /// each setpoint is moved by the response the settling shows (see `simulate`).
  std::int64_t settle_steps = 0;
  std::vector<double> start_mw;
};

/// Checks the spec (units known, one power series per unit, the recording long enough for a step)
/// and prepares it; each unit's setpoint becomes its measured output at rest (the mean before the
/// first excursion), or, for a recording that starts off nominal, the setpoint that gives its first
/// measured output at that frequency. Empty with `error` set.
std::optional<PreparedPlayback> prepare_playback(const PlaybackSpec& spec, std::string& error);

/// The outputs of a prepared playback's units, with the playback scenario `scenario` (possibly with
/// changed values); empty with `error` set when that scenario does not pass its checks. With
/// `settle_steps`, the units first settle at the recording's first frequency, and each setpoint is
/// then moved by the difference between its `start_mw` and the settled output, so the comparison
/// starts where the plant was whatever the values tried (the droop's answer to the offset depends on
/// them); the moved scenario is settled again and played.
std::optional<std::vector<std::vector<double>>> simulate(const PreparedPlayback& prep,
                                                         const nlohmann::ordered_json& scenario, std::string& error);

/// Root mean square and largest absolute difference of two series (and the index of the largest).
struct SeriesError {
  double rmse = 0.0, max_abs = 0.0;
  std::size_t max_at = 0;
};
SeriesError series_error(const std::vector<double>& a, const std::vector<double>& b);

/// Plays the recording into the units and compares; empty with `error` set.
std::optional<PlaybackResult> run_playback(const PlaybackSpec& spec, std::string& error);

/// `t_s,f_hz,<unit>.measured_mw,<unit>.simulated_mw,...`, full precision.
std::string playback_csv(const PlaybackResult& r, const std::vector<std::string>& unit_ids);
/// Measured and simulated output against time, one plot for all units.
std::string playback_time_svg(const PlaybackResult& r);
/// Measured and simulated output against frequency (the droop characteristic as it was followed).
std::string playback_droop_svg(const PlaybackResult& r);
/// The comparison as JSON (no series).
nlohmann::ordered_json playback_to_json(const PlaybackResult& r);

}  // namespace droopline::study
