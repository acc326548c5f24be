#pragma once
// The model-validation commands: `droopline playback`, `droopline fit` and `droopline inject`.
#include <cstdint>
#include <string>
#include <vector>

namespace droopline::cli {

/// How a recording is read (see README, "Reading recordings").
struct RecordingArgs {
  std::string measured;                    ///< the recording: .csv or COMTRADE .cfg
  std::string time_column = "t_s";         ///< CSV time column
  std::string frequency_column;            ///< default: `<area>.f_hz` of the first unit's area
  std::vector<std::string> power_columns;  ///< one per unit; default `<unit>.p_mw`
  double base_mw = 0.0, base_hz = 0.0;     ///< per-unit values when given
};

/// The arguments of `droopline playback`.
struct PlaybackArgs {
  std::string scenario_file, out_dir;
  std::vector<std::string> units;
  RecordingArgs rec;
  double threshold_hz = 0.0;  ///< 0: the widest deadband + 10 mHz
  bool json = false;
};
/// `droopline playback FILE --unit ID --measured REC`: 0 done, 1 output failure, 2 bad input.
int playback(const PlaybackArgs& args);

/// The arguments of `droopline fit`.
struct FitArgs {
  std::string scenario_file, out_dir;
  std::vector<std::string> units, recordings;  ///< several: one fit each (paired when both repeat)
  RecordingArgs rec;                           ///< `measured` unused: `recordings`
  std::vector<std::string> params;             ///< PATH=LO:HI
  unsigned starts = 4, threads = 0;
  std::uint64_t seed = 1;
  std::uint32_t shard = 1, shards = 1;
  bool json = false;
};
/// `droopline fit FILE --unit ID --measured REC --param PATH=LO:HI ...`: 0 done, 1 output failure, 2 bad input.
int fit(const FitArgs& args);

/// The arguments of `droopline inject`.
struct InjectArgs {
  std::string scenario_file, unit, profile, out_dir;
  bool json = false;
};
/// `droopline inject FILE --unit ID --profile PROFILE`: 0 all passed, 3 some failed, 1 output failure, 2 bad input.
int inject(const InjectArgs& args);

}  // namespace droopline::cli
