#include "telemetry.hpp"

#include <algorithm>
#include <cmath>

#include <nlohmann/json.hpp>

#include "droopline/format.hpp"

namespace droopline {
namespace {
using json = nlohmann::ordered_json;

// Pieces of a frame written straight as text: a frame goes out 20 times a second whatever the
// number of clients, and building a JSON document to print it cost most of the idle loop's time.
// `,"name":` : the start of a field (without the comma for an object's first).
void key(std::string& out, const char* name, bool first = false) {
  out += first ? "\"" : ",\"";
  out += name;
  out += "\":";
}
void field(std::string& out, const char* name, double v) {
  key(out, name);
  append_json_number(out, v);
}
void field(std::string& out, const char* name, bool v) {
  key(out, name);
  out += v ? "true" : "false";
}
void field(std::string& out, const char* name, const char* v) {
  key(out, name);
  append_json_string(out, v);
}
// `"id":{"first":v` : the opening of one member of a map, its first field written.
void open_member(std::string& out, bool first_member, const std::string& id, const char* name, double v) {
  if (!first_member) out += ',';
  append_json_string(out, id);
  out += ":{";
  key(out, name, true);
  append_json_number(out, v);
}
}  // namespace

std::string frame_json(const Engine& e, double wall_s, bool paused, double speed) {
  const SystemDef& def_ = e.def();
  std::string out;
  out.reserve(256 + 420 * def_.areas.size() + 300 * def_.units.size() + 120 * def_.ties.size());
  out += "{\"type\":\"frame\"";
  field(out, "t_s", e.time_s());
  field(out, "wall_s", wall_s);
  out += ",\"step\":";
  out += std::to_string(e.step_index());
  field(out, "paused", paused);
  field(out, "speed", speed);
  out += ",\"areas\":{";
  for (std::size_t a = 0; a < def_.areas.size(); ++a) {
    const AreaState s = e.area(AreaId{static_cast<std::uint32_t>(a)});
    open_member(out, a == 0, def_.areas[a].id, "f_hz", s.f_hz);
    field(out, "rocof_hz_per_s", s.rocof_hz_per_s);
    field(out, "demand_mw", s.demand_mw);
    field(out, "generation_mw", s.generation_mw);
    field(out, "export_mw", s.export_mw);
    field(out, "scheduled_export_mw", s.scheduled_export_mw);
    field(out, "ace_mw", s.ace_mw);
    field(out, "agc_mw", s.agc_mw);
    field(out, "agc_enabled", s.agc_enabled);
    field(out, "agc_mode", to_string(s.agc_mode));
    field(out, "shed_mw", s.shed_mw);
    field(out, "collapsed", s.collapsed);
    out += ",\"island\":";
    out += std::to_string(s.island);
    out += '}';
  }
  out += "},\"units\":{";
  for (std::size_t u = 0; u < def_.units.size(); ++u) {
    const UnitState s = e.unit(UnitId{static_cast<std::uint32_t>(u)});
    open_member(out, u == 0, def_.units[u].id, "p_mw", s.p_mw);
    field(out, "setpoint_mw", s.setpoint_mw);
    field(out, "agc_mw", s.agc_mw);
    field(out, "headroom_up_mw", s.headroom_up_mw);
    field(out, "headroom_down_mw", s.headroom_down_mw);
    field(out, "droop", s.droop);
    field(out, "deadband_hz", s.deadband_hz);
    field(out, "mode", to_string(s.mode));
    field(out, "status", to_string(s.status));
    if (def_.units[u].turbine.type == TurbineType::battery) field(out, "energy_mwh", s.energy_mwh);
    out += '}';
  }
  out += "},\"ties\":{";
  for (std::size_t t = 0; t < def_.ties.size(); ++t) {
    const TieState s = e.tie(TieId{static_cast<std::uint32_t>(t)});
    open_member(out, t == 0, def_.ties[t].id, "flow_mw", s.flow_mw);
    field(out, "angle_deg", s.angle_deg);
    field(out, "scheduled_mw", s.scheduled_mw);
    field(out, "in_service", s.in_service);
    out += '}';
  }
  out += "}}";
  return out;
}

std::string HelloSnapshot::to_json(double history_s) const {
  // Built as text around the pieces that already are JSON (scenario, events).
  std::string out = "{\"type\":\"hello\",\"scenario\":";
  out += *scenario_json;
  out += ",\"speed\":";
  append_exact(out, speed);
  out += paused ? ",\"paused\":true" : ",\"paused\":false";
  out += ",\"columns\":" + json(columns).dump();
  out += ",\"history_every_s\":";
  append_exact(out, every_s);
  out += ",\"history\":[";
  const std::size_t w = std::max<std::size_t>(1, columns.size());
  std::size_t first = 0;  // the first row sent: all, or those of the last history_s seconds
  if (history_s >= 0.0 && rows.size() >= w) {
    const double from = rows[(rows.size() / w - 1) * w] - history_s - 1e-9;
    first = rows.size() / w * w;
    while (history_s > 0.0 && first >= w && rows[first - w] >= from) first -= w;
  }
  for (std::size_t i = first; i < rows.size(); i += w) {
    out += i > first ? ",[" : "[";
    for (std::size_t c = 0; c < w && i + c < rows.size(); ++c) {
      if (c) out += ',';
      append_json_number(out, rows[i + c]);
    }
    out += ']';
  }
  out += "],\"events\":[";
  for (std::size_t i = 0; i < events.size(); ++i) {
    if (i) out += ',';
    out += events[i];
  }
  out += "],\"alarms\":" + alarms_json + "}";
  return out;
}

void HistoryRing::reset(std::size_t width, std::size_t capacity) {
  width_ = width;
  cap_ = std::max<std::size_t>(1, capacity);
  start_ = count_ = 0;
  data_.assign(width_ * cap_, 0.0);
}

void HistoryRing::push(const std::vector<double>& row) {
  const std::size_t slot = (start_ + count_) % cap_;
  if (count_ == cap_)
    start_ = (start_ + 1) % cap_;
  else
    ++count_;
  std::copy_n(row.begin(), std::min(row.size(), width_), data_.begin() + static_cast<std::ptrdiff_t>(slot * width_));
}

void HistoryRing::drop_after(double t_s) {
  while (count_ > 0 && data_[((start_ + count_ - 1) % cap_) * width_] > t_s + 1e-9) --count_;
}

void HistoryRing::assign(const std::vector<double>& flat) {
  const std::size_t rows = width_ ? flat.size() / width_ : 0, kept = std::min(rows, cap_);
  start_ = 0;
  count_ = kept;
  std::copy_n(flat.end() - static_cast<std::ptrdiff_t>(kept * width_), kept * width_, data_.begin());
}

std::vector<double> HistoryRing::flat() const {
  std::vector<double> out;
  out.reserve(count_ * width_);
  const std::size_t first = std::min(count_, cap_ - start_);  // rows before the wrap
  const auto begin = data_.begin() + static_cast<std::ptrdiff_t>(start_ * width_);
  out.insert(out.end(), begin, begin + static_cast<std::ptrdiff_t>(first * width_));
  out.insert(out.end(), data_.begin(), data_.begin() + static_cast<std::ptrdiff_t>((count_ - first) * width_));
  return out;
}

std::shared_ptr<const std::string> EventLog::add(json event, std::int64_t disturbance) {
  constexpr std::size_t kKept = 1000;
  std::lock_guard lock(mutex_);
  event["seq"] = ++seq_;
  auto text = std::make_shared<const std::string>(event.dump(-1, ' ', false, json::error_handler_t::replace));
  if (disturbance >= 0) {
    auto old = std::find_if(entries_.begin(), entries_.end(), [&](const Entry& e) { return e.disturbance == disturbance; });
    if (old != entries_.end()) entries_.erase(old);
  }
  const json* at = disturbance >= 0 && event.contains("at_s") ? &event["at_s"] : nullptr;
  const double at_s = at && at->is_number() ? at->get<double>() : NAN;
  const json* t = event.contains("t_s") ? &event["t_s"] : nullptr;
  entries_.push_back({seq_, *text, disturbance, at_s, disturbance >= 0 ? at_s : t && t->is_number() ? t->get<double>() : NAN});
  while (entries_.size() > kKept) entries_.pop_front();
  return text;
}

std::string EventLog::since(std::uint64_t since) const {
  std::lock_guard lock(mutex_);
  std::string out = "{\"events\":[";
  bool first = true;
  for (const Entry& e : entries_) {
    if (e.seq <= since) continue;
    if (!first) out += ',';
    first = false;
    out += e.text;
  }
  return out + "]}";
}

std::vector<std::string> EventLog::all() const {
  std::lock_guard lock(mutex_);
  std::vector<std::string> out;
  out.reserve(entries_.size());
  for (const Entry& e : entries_) out.push_back(e.text);
  return out;
}

std::optional<double> EventLog::first_disturbance_from(double from_s) const {
  std::lock_guard lock(mutex_);
  // An entry is replaced at the log's end as its disturbance's figures fill in: the earliest is
  // searched for, not the first found.
  std::optional<double> first;
  for (const Entry& e : entries_)
    if (e.at_s >= from_s && (!first || e.at_s < *first)) first = e.at_s;
  return first;
}

void EventLog::clear() {
  std::lock_guard lock(mutex_);
  entries_.clear();
}

std::deque<EventLog::Entry> EventLog::entries() const {
  std::lock_guard lock(mutex_);
  return entries_;
}

void EventLog::put_entries(std::deque<Entry> entries) {
  std::lock_guard lock(mutex_);
  entries_ = std::move(entries);
}

void EventLog::drop_after(double t_s) {
  std::lock_guard lock(mutex_);
  std::erase_if(entries_, [&](const Entry& e) { return e.t_s > t_s + 1e-9; });
}

std::vector<std::string> split_on(std::string_view text, std::string_view separator) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start <= text.size()) {
    const std::size_t end = text.find(separator, start);
    out.emplace_back(text.substr(start, end == std::string_view::npos ? std::string_view::npos : end - start));
    if (end == std::string_view::npos) break;
    start = end + separator.size();
  }
  return out;
}

std::string rows_text(const std::vector<std::string>& columns, const std::vector<double>& rows, double out_dt,
                      double from_s, double to_s, double every_s, bool csv) {
  const std::int64_t stride =
      every_s > 0.0 ? std::max<std::int64_t>(1, std::llround(every_s / out_dt)) : 1;
  const std::size_t w = std::max<std::size_t>(1, columns.size());
  std::string out;
  if (csv) {
    for (std::size_t i = 0; i < columns.size(); ++i) out += (i ? "," : "") + columns[i];
    out += '\n';
  } else {
    out = "{\"columns\":" + json(columns).dump() + ",\"rows\":[";
  }
  bool first = true;
  for (std::size_t i = 0; i + w <= rows.size(); i += w) {
    const double t = rows[i];
    if (t < from_s - 1e-9 || t > to_s + 1e-9) continue;
    if (std::llround(t / out_dt) % stride != 0) continue;
    if (!csv) out += first ? "[" : ",[";
    first = false;
    for (std::size_t c = 0; c < w; ++c) {
      if (c) out += ',';
      if (csv)
        append_exact(out, rows[i + c]);
      else
        append_json_number(out, rows[i + c]);
    }
    out += csv ? "\n" : "]";
  }
  if (!csv) out += "]}";
  return out;
}

std::vector<double> rows_within(std::size_t width, const std::vector<double>& rows, double from_s, double to_s) {
  const std::size_t w = std::max<std::size_t>(1, width);
  std::vector<double> out;
  for (std::size_t i = 0; i + w <= rows.size(); i += w)
    if (rows[i] >= from_s - 1e-9 && rows[i] <= to_s + 1e-9)
      out.insert(out.end(), rows.begin() + static_cast<std::ptrdiff_t>(i), rows.begin() + static_cast<std::ptrdiff_t>(i + w));
  return out;
}

}  // namespace droopline
