#include "history_store.hpp"

#include <algorithm>
#include <cmath>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {

void HistoryStore::start(const Engine& engine, const SystemDef& def, double history_s) {
  auto scenario_text = std::make_shared<const std::string>(scenario_to_json(def).dump());
  std::lock_guard lock(mutex_);
  columns_ = engine.series_columns();
  every_s_ = def.output_every_s;
  scenario_json_ = std::move(scenario_text);
  events_.clear();  // a new run: its log starts empty (the journal keeps the old one)
  scenario_name_ = def.name;
  nominal_hz_ = def.nominal_hz;
  started_ = std::chrono::system_clock::now();
  rows_.reset(columns_.size(), static_cast<std::size_t>(std::max(1.0, history_s / def.output_every_s)) + 1);
}

void HistoryStore::push(const std::vector<double>& row) {
  std::lock_guard lock(mutex_);
  rows_.push(row);
}

void HistoryStore::drop_after(double t_s) {
  std::lock_guard lock(mutex_);
  rows_.drop_after(t_s);
}

std::shared_ptr<const std::vector<double>> HistoryStore::copy_rows(std::size_t budget_bytes) const {
  std::lock_guard lock(mutex_);
  if (rows_.size() * rows_.width() * sizeof(double) > budget_bytes) return nullptr;
  return std::make_shared<const std::vector<double>>(rows_.flat());
}

void HistoryStore::put_rows(const std::shared_ptr<const std::vector<double>>& rows) {
  std::lock_guard lock(mutex_);
  rows_.assign(rows ? *rows : std::vector<double>{});
}

void HistoryStore::fill(HelloSnapshot& snap) const {
  std::lock_guard lock(mutex_);
  snap.scenario_json = scenario_json_;
  snap.columns = columns_;
  snap.every_s = every_s_;
  snap.rows = rows_.flat();
  snap.events = events_.all();
}

std::optional<std::string> HistoryStore::history(double from_s, double to_s, double every_s, bool csv,
                                                 std::string& error) const {
  std::vector<std::string> columns;
  std::vector<double> rows;
  double out_dt = 0.1;
  {
    std::lock_guard lock(mutex_);  // copy out; format without holding the loop up
    columns = columns_;
    rows = rows_.flat();
    out_dt = every_s_;
  }
  // Rows are kept every output_every_s: a spacing between them would have to be rounded.
  const double ratio = every_s / out_dt;
  // At most 1e6 s: the spacing in rows stays a small integer (and no history is longer).
  if (every_s > 0.0 && (ratio < 0.5 || every_s > 1e6 || std::fabs(ratio - std::round(ratio)) > 1e-6 * ratio)) {
    error = "query parameter every_s: must be 0 (every row) or a whole multiple of the recorded interval " +
            fmt_num(out_dt) + " s (the scenario's output_every_s) up to 1e6 s, got " + fmt_num(every_s);
    return std::nullopt;
  }
  return rows_text(columns, rows, out_dt, from_s, to_s, every_s, csv);
}

study::ComtradeRecord HistoryStore::record(double from_s, double to_s) const {
  study::ComtradeInput in;
  std::vector<double> rows;
  {
    std::lock_guard lock(mutex_);
    in.columns = columns_;
    in.sample_hz = 1.0 / every_s_;
    in.station = scenario_name_;
    in.nominal_hz = nominal_hz_;
    in.start = started_;
    rows = rows_.flat();
  }
  in.rows = rows_within(in.columns.size(), rows, from_s, to_s);
  // The trigger at the first disturbance from the window's start on, as `droopline record` puts
  // it (make_comtrade keeps it inside the window).
  in.trigger_s = events_.first_disturbance_from(from_s).value_or(from_s);
  return study::make_comtrade(in);
}

}  // namespace droopline
