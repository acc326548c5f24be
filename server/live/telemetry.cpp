#include "telemetry.hpp"

#include <algorithm>
#include <cmath>

#include <nlohmann/json.hpp>

#include "droopline/format.hpp"

namespace droopline {
namespace {
using json = nlohmann::ordered_json;
}  // namespace

std::string frame_json(const Engine& e, double wall_s, bool paused, double speed) {
  const SystemDef& def_ = e.def();
  json j;
  j["type"] = "frame";
  j["t_s"] = e.time_s();
  j["wall_s"] = wall_s;
  j["step"] = e.step_index();
  j["paused"] = paused;
  j["speed"] = speed;
  json areas = json::object(), units = json::object(), ties = json::object();
  for (std::size_t a = 0; a < def_.areas.size(); ++a) {
    const AreaState s = e.area(AreaId{static_cast<std::uint32_t>(a)});
    areas[def_.areas[a].id] = {{"f_hz", s.f_hz},           {"rocof_hz_per_s", s.rocof_hz_per_s},
                               {"demand_mw", s.demand_mw}, {"generation_mw", s.generation_mw},
                               {"export_mw", s.export_mw}, {"scheduled_export_mw", s.scheduled_export_mw},
                               {"ace_mw", s.ace_mw},       {"agc_mw", s.agc_mw},
                               {"agc_enabled", s.agc_enabled}, {"agc_mode", to_string(s.agc_mode)},
                               {"shed_mw", s.shed_mw},
                               {"collapsed", s.collapsed}, {"island", s.island}};
  }
  for (std::size_t u = 0; u < def_.units.size(); ++u) {
    const UnitState s = e.unit(UnitId{static_cast<std::uint32_t>(u)});
    json ju{{"p_mw", s.p_mw},
            {"setpoint_mw", s.setpoint_mw},
            {"agc_mw", s.agc_mw},
            {"headroom_up_mw", s.headroom_up_mw},
            {"headroom_down_mw", s.headroom_down_mw},
            {"droop", s.droop},
            {"deadband_hz", s.deadband_hz},
            {"mode", to_string(s.mode)},
            {"status", to_string(s.status)}};
    if (def_.units[u].turbine.type == TurbineType::battery) ju["energy_mwh"] = s.energy_mwh;
    units[def_.units[u].id] = std::move(ju);
  }
  for (std::size_t t = 0; t < def_.ties.size(); ++t) {
    const TieState s = e.tie(TieId{static_cast<std::uint32_t>(t)});
    ties[def_.ties[t].id] = {{"flow_mw", s.flow_mw},
                             {"angle_deg", s.angle_deg},
                             {"scheduled_mw", s.scheduled_mw},
                             {"in_service", s.in_service}};
  }
  j["areas"] = std::move(areas);
  j["units"] = std::move(units);
  j["ties"] = std::move(ties);
  return j.dump();
}

std::string HelloSnapshot::to_json() const {
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
  for (std::size_t i = 0; i < rows.size(); i += w) {
    out += i ? ",[" : "[";
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
  entries_.push_back({seq_, *text, disturbance});
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

void EventLog::clear() {
  std::lock_guard lock(mutex_);
  entries_.clear();
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
