#pragma once
/// Disturbance records in the IEEE C37.111-1999 (COMTRADE) ASCII format: a `.cfg` describing
/// the channels and a `.dat` of samples, readable by other analysis tools.
#include <chrono>
#include <string>
#include <vector>

namespace droopline::study {

struct ComtradeInput {
  std::string station;                ///< station name (commas are replaced)
  std::string device = "droopline";   ///< recording device id
  std::vector<std::string> columns;   ///< series columns, the first `t_s`
  std::vector<double> rows;           ///< flat, columns.size() per row, equally spaced in time
  double sample_hz = 10.0;            ///< 1 / output_every_s
  double nominal_hz = 50.0;           ///< line frequency
  std::chrono::system_clock::time_point start;  ///< wall time of t = 0 of the series
  double trigger_s = 0.0;             ///< simulation time of the trigger (first disturbance)
};

struct ComtradeRecord {
  std::string cfg, dat;
  std::string error;  ///< set when there is nothing to write
};

/// Analog channels: every column but `t_s` (`<area>.f_hz` in Hz, `<unit>.p_mw` and
/// `<tie>.flow_mw` in MW), each scaled to integers within +-99999 by value = a * x + b.
ComtradeRecord make_comtrade(const ComtradeInput& in);

}  // namespace droopline::study
