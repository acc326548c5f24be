#pragma once
/// Measured recordings read back for playback and fitting: a plant's frequency and its units'
/// outputs from a CSV file or an IEEE C37.111 (COMTRADE) 1999 or 2013 record.
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "droopline/validate.hpp"

namespace droopline::study {

/// One recording on one time base: frequency and any number of power series (several units of one
/// plant), all in physical units.
struct Recording {
  std::vector<double> t_s;                                            ///< sample times (s), strictly increasing
  std::vector<double> frequency_hz;                                   ///< measured frequency (Hz), one per sample
  std::vector<std::pair<std::string, std::vector<double>>> power_mw;  ///< (column or channel, MW)
  std::string source;                                                 ///< the file read
  std::vector<std::string> warnings;  ///< what was repaired or assumed (missing samples, resampling)
};

/// How values are recorded: in Hz and MW, or per unit of a base.
enum class RecordingUnits { physical, per_unit };

/// Which series to take and how to read them.
struct RecordingOptions {
  std::string time_column = "t_s";         ///< CSV: the time column (s); COMTRADE times come from the .dat
  std::string frequency_column;            ///< CSV column or COMTRADE ch_id of the frequency
  std::vector<std::string> power_columns;  ///< CSV columns or COMTRADE ch_ids of the outputs
  RecordingUnits units = RecordingUnits::physical;
  double base_mw = 0.0;               ///< per unit: power base (MW), e.g. the unit's rating
  double base_hz = 0.0;               ///< per unit: frequency base (Hz), e.g. 50
  std::optional<double> resample_hz;  ///< resample onto this uniform rate (Hz); COMTRADE with several
                                      ///< rates otherwise goes onto the highest
};

/// Reads `path` (.csv or .cfg, any case) into one recording; on errors returns nothing and adds them,
/// each naming the file and its line, column or byte, to `issues`.
std::optional<Recording> read_recording(const std::string& path, const RecordingOptions& options,
                                        std::vector<Issue>& issues);

/// A CSV recording: a header row, comma or semicolon separated, columns chosen by exact name.
std::optional<Recording> read_csv_recording(const std::string& path, const RecordingOptions& options,
                                            std::vector<Issue>& issues);

/// A CSV recording from its text (received over the network, say); messages name `name` as the file
/// (`name line N column "x": ...`). The file reader above reads the file and calls this.
std::optional<Recording> read_csv_recording_text(std::string_view text, const std::string& name,
                                                 const RecordingOptions& options, std::vector<Issue>& issues);

/// A COMTRADE record: the .cfg at `path` and the .dat beside it (same stem, .dat or .DAT).
std::optional<Recording> read_comtrade_recording(const std::string& path, const RecordingOptions& options,
                                                 std::vector<Issue>& issues);

/// A COMTRADE record from the .cfg's text and the .dat's bytes (ASCII text or binary records);
/// messages name `name` as the .cfg and its stem + ".dat" as the data file (`X.dat byte N: ...`).
std::optional<Recording> read_comtrade_recording_data(std::string_view cfg_text, std::string_view dat_bytes,
                                                      const std::string& name, const RecordingOptions& options,
                                                      std::vector<Issue>& issues);

/// The data file types of a COMTRADE record.
enum class ComtradeFileType { ascii, binary, binary32, float32 };

/// One analog channel line of a .cfg.
struct ComtradeAnalog {
  std::string ch_id, phase, element, unit;
  double a = 1.0, b = 0.0;                ///< value = a * x + b
  double skew_us = 0.0;                   ///< skew (us) from the sample's time
  double primary = 1.0, secondary = 1.0;  ///< transformer ratio primary:secondary
  bool secondary_values = false;          ///< PS flag `S`: a * x + b is a secondary value
  std::size_t line = 0;                   ///< its line in the .cfg
};

/// One sampling rate and the last sample number taken at it.
struct ComtradeRate {
  double sample_hz = 0.0;
  std::uint64_t end_sample = 0;
};

/// What a .cfg says.
struct ComtradeConfig {
  std::string station, device;
  int revision = 0;  ///< 1999 or 2013
  std::vector<ComtradeAnalog> analogs;
  std::size_t digital_count = 0;
  double line_hz = 0.0;
  std::vector<ComtradeRate> rates;  ///< empty: times from the .dat's timestamps
  std::uint64_t samples = 0;        ///< total sample count (the last endsamp)
  std::string start, trigger;       ///< `dd/mm/yyyy,hh:mm:ss.ssssss` as written
  double timestamp_unit_s = 1e-6;   ///< one timestamp step (s): us, or ns when the start has 9 decimals
  ComtradeFileType file_type = ComtradeFileType::ascii;
  double timemult = 1.0;
};

/// Parses the text of a .cfg; errors name `name` and the line.
std::optional<ComtradeConfig> parse_comtrade_cfg(std::string_view text, const std::string& name,
                                                 std::vector<Issue>& issues);

namespace detail {

/// A whole-field decimal number (surrounding blanks allowed); false for empty, partial, NaN or inf.
bool parse_number(std::string_view field, double& out);
/// `field` without surrounding blanks.
std::string_view trim(std::string_view field);
/// The lines of `text` without their ends (LF or CRLF), a byte order mark dropped.
std::vector<std::string_view> lines_of(std::string_view text);
/// Fills samples marked missing by linear interpolation in time (held at the ends); the count filled.
std::size_t fill_missing(const std::vector<double>& t_s, std::vector<double>& values, const std::vector<char>& missing);
/// Moves every series onto a uniform grid at `hz` from the first to the last time, linearly, and
/// warns with `why`; false with an issue when the grid would be too large to hold.
bool resample(Recording& rec, double hz, const std::string& why, std::vector<Issue>& issues);
/// Checks the options (names given, bases positive); false with issues when they cannot be used.
bool check_options(const RecordingOptions& options, std::vector<Issue>& issues);
/// The text of `path` once the options are checked; the first step of each reader.
std::optional<std::string> read_checked(const std::string& path, const RecordingOptions& options,
                                        std::vector<Issue>& issues);
/// The index in `names` of each of `wanted`, each present exactly once; otherwise issues at `where`
/// listing the `kind`s there are (`no column "x" (columns: a, b)`).
std::optional<std::vector<std::size_t>> choose(const std::vector<std::string>& names,
                                               const std::vector<std::string>& wanted, const std::string& where,
                                               const std::string& kind, std::vector<Issue>& issues);
/// Per unit to physical, then `resample_hz`; the last step of each reader.
bool finish(Recording& rec, const RecordingOptions& options, std::vector<Issue>& issues);

}  // namespace detail
}  // namespace droopline::study
