// The debrief worked out from a journal: the final lineage re-simulated with the exercise's alarm
// and objective monitors fed as the live loop feeds them, the timeline, disturbances and samples.
#include <algorithm>
#include <cmath>
#include <map>
#include <memory>
#include <nlohmann/json.hpp>

#include "debrief_data.hpp"
#include "droopline/format.hpp"
#include "droopline/journal_read.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {
namespace {

using json = nlohmann::ordered_json;

// At most this many chart samples per series (a long run is sampled more coarsely).
constexpr double kMaxSamples = 2000.0;
constexpr double kSampleS = 0.5;

std::string mark_text(const SystemDef& def, const JournalMark& m) {
  const double step_s = def.step_s;
  switch (m.kind) {
    case JournalMark::Kind::savepoint:
      return "save point " + std::to_string(m.id) + " \"" + m.name + "\" kept";
    case JournalMark::Kind::restore:
      return "save point " + std::to_string(m.id) +
             " restored: on from t = " + fmt_fixed(static_cast<double>(m.to_step) * step_s, 2) + " s";
    case JournalMark::Kind::rewind:
      return "rewound to t = " + fmt_fixed(static_cast<double>(m.to_step) * step_s, 2) + " s";
  }
  return {};
}

const char* mark_kind(JournalMark::Kind k) {
  return k == JournalMark::Kind::savepoint ? "save point" : k == JournalMark::Kind::restore ? "restore" : "rewind";
}

DebriefDisturbance disturbance_of(const SystemDef& def, const Disturbance& d) {
  DebriefDisturbance out{
      d.at_s,        describe_cause(def, d),  d.delta_mw, d.rocof_hz_per_s,        d.zenith, d.nadir_hz, d.nadir_at_s,
      d.settling_hz, d.response_mw_per_0p1hz, d.pre_hz,   d.predicted_settling_hz, false, {}};
  for (const UnitResponse& u : d.units)
    out.units.push_back({def.units[u.unit].id, u.predicted_mw, u.response_10s_mw, u.response_30s_mw});
  return out;
}

// The seats that answer for any of `areas` (indices).
std::vector<std::string> seats_for(const Debrief& d, const SystemDef& def, const std::vector<std::uint32_t>& areas) {
  std::vector<std::string> out;
  for (const DebriefSeat& s : d.seats)
    for (std::uint32_t a : areas)
      if (std::find(s.areas.begin(), s.areas.end(), def.areas[a].id) != s.areas.end()) {
        out.push_back(s.id);
        break;
      }
  return out;
}

// The re-simulation of the final lineage: one step at a time, as the live loop went.
class Resim {
 public:
  Resim(const JournalRun& run, const FinalLineage& lineage, Debrief& d)
      : run_(run), lineage_(lineage), d_(d), engine_(Engine::create(run.system)) {
    if (run.exercise) {
      alarms_.emplace(run.system, run.exercise->def.alarms);
      objectives_.emplace(*run.exercise);
    }
    const SystemDef& def = run.system.def();
    for (const AreaDef& a : def.areas) d_.series.areas.push_back(a.id);
    for (const TieDef& t : def.ties) d_.series.ties.push_back(t.id);
    d_.series.f_hz.resize(def.areas.size());
    d_.series.ace_mw.resize(def.areas.size());
    d_.series.flow_mw.resize(def.ties.size());
    secondary_.resize(def.areas.size());
    const auto by_time = static_cast<std::int64_t>(std::llround(kSampleS / def.step_s));
    const auto by_count = static_cast<std::int64_t>(std::ceil(static_cast<double>(run.last_step) / kMaxSamples));
    every_ = std::max<std::int64_t>({1, by_time, by_count});
  }

  void run() {
    const SystemDef& def = run_.system.def();
    std::size_t b = 0, a = 0;
    sample();
    for (;;) {
      const std::int64_t now = engine_->step_index();
      // Acknowledgements between steps (after the last step's alarm update), then the batches due.
      for (; a < lineage_.acks.size() && run_.acks[lineage_.acks[a]].step <= now; ++a) ack(run_.acks[lineage_.acks[a]]);
      for (; b < lineage_.batches.size() && run_.commands[lineage_.batches[b]].step <= now; ++b)
        apply(run_.commands[lineage_.batches[b]]);
      if (now >= run_.last_step) break;
      engine_->step();
      std::vector<Notice> fresh = engine_->take_notices();
      for (const Notice& n : fresh) event_of_notice(n);
      pending_.insert(pending_.end(), fresh.begin(), fresh.end());
      for (const AlarmChange& c : feed_monitors(*engine_, alarms_, objectives_, pending_)) alarm_event(c);
      if (engine_->step_index() % every_ == 0) sample();
      track_secondary();
    }
    engine_->close_disturbances();
    d_.end_s = engine_->time_s();
    for (Span& s : secondary_)
      if (s.on) s.spans.emplace_back(s.since, d_.end_s);
    for (const Disturbance& dist : engine_->disturbances()) {
      d_.disturbances.push_back(disturbance_of(def, dist));
      for (std::uint32_t i : dist.areas)
        for (const auto& [from, to] : secondary_[i].spans)
          if (from <= dist.at_s + 52.0 + 1e-9 && to >= dist.at_s + 20.0 - 1e-9)
            d_.disturbances.back().secondary_in_window = true;
    }
    if (objectives_) d_.scores = objectives_->scores(alarms_ ? &*alarms_ : nullptr);
    alarm_delays();
  }

 private:
  // When each area's secondary control was on: spans of simulated time.
  struct Span {
    bool on = false;
    double since = 0.0;
    std::vector<std::pair<double, double>> spans;
  };
  void track_secondary() {
    for (std::uint32_t i = 0; i < secondary_.size(); ++i) {
      Span& s = secondary_[i];
      const bool on = engine_->area(AreaId{i}).agc_enabled;
      if (on && !s.on) s.since = engine_->time_s();
      if (!on && s.on) s.spans.emplace_back(s.since, engine_->time_s());
      s.on = on;
    }
  }

  void sample() {
    DebriefSeries& s = d_.series;
    s.t_s.push_back(engine_->time_s());
    for (std::uint32_t i = 0; i < s.areas.size(); ++i) {
      const AreaState st = engine_->area(AreaId{i});
      s.f_hz[i].push_back(st.f_hz);
      s.ace_mw[i].push_back(st.ace_mw);
    }
    for (std::uint32_t i = 0; i < s.ties.size(); ++i) s.flow_mw[i].push_back(engine_->tie(TieId{i}).flow_mw);
  }

  void ack(const JournalAck& k) {
    const bool ok = alarms_ && alarms_->acknowledge(k.alarm, k.by, engine_->time_s());
    d_.timeline.push_back({engine_->time_s(),
                           "alarm acknowledged",
                           k.by,
                           ok ? "alarm A" + std::to_string(k.alarm) + ": " + alarms_->find(k.alarm)->message
                              : "alarm A" + std::to_string(k.alarm) +
                                    ": not taken (no such alarm on this lineage, or acknowledged already)",
                           "A" + std::to_string(k.alarm),
                           {},
                           {},
                           {},
                           {}});
  }

  void apply(const JournalBatch& batch) {
    // Resolved and applied as the live pipeline did; a batch the state refused is refused again.
    Resolved resolved = resolve_all(engine_->system(), batch.commands);
    const ApplyResult r = resolved.issues.empty() ? engine_->apply_all(resolved.actions) : ApplyResult{};
    const bool script = batch.by == "script";
    const std::string marker = script ? "S" + std::to_string(++scripts_) : std::to_string(++actions_);
    std::vector<Notice> fresh = engine_->take_notices();
    std::string what;
    for (const Notice& n : fresh)
      if (n.kind == NoticeKind::command) what += (what.empty() ? "" : "; ") + describe(engine_->def(), n);
    if (!r.ok) {
      const auto& issues = resolved.issues.empty() ? r.issues : resolved.issues;
      what = "refused: " + (issues.empty() ? std::string("?") : issues.front().text());
    } else if (objectives_) {
      objectives_->actions_applied(batch.by, r.at_s);
    }
    d_.timeline.push_back({engine_->time_s(), script ? "script" : "action", batch.by, what, marker, {}, {}, {}, {}});
    if (r.ok) actions_at_.push_back({engine_->time_s(), batch.by});
    pending_.insert(pending_.end(), fresh.begin(), fresh.end());
  }

  void event_of_notice(const Notice& n) {
    if (n.kind == NoticeKind::islanded) return;  // a disturbance's cause, not an event of its own
    const std::string by = n.kind == NoticeKind::command ? "scenario" : "system";
    d_.timeline.push_back({n.t_s, "event", by, describe(engine_->def(), n), "", {}, {}, {}, {}});
  }

  void alarm_event(const AlarmChange& c) {
    const Alarm* al = alarms_->find(c.id);
    if (!al || c.what == AlarmChange::What::acknowledged) return;
    const bool raised = c.what == AlarmChange::What::raised;
    d_.timeline.push_back({raised ? al->raised_s : al->cleared_s.value_or(engine_->time_s()),
                           raised ? "alarm raised" : "alarm cleared",
                           "",
                           al->message,
                           "A" + std::to_string(al->id),
                           {},
                           {},
                           {},
                           {}});
  }

  // Each raised alarm's time to the first action of a seat it concerns and to its acknowledgement.
  void alarm_delays() {
    if (!alarms_) return;
    const SystemDef& def = run_.system.def();
    for (DebriefEvent& e : d_.timeline) {
      if (e.kind != "alarm raised") continue;
      const Alarm* al = alarms_->find(std::stoull(e.marker.substr(1)));
      const std::vector<std::string> seats = seats_for(d_, def, al->areas);
      for (const auto& [t, by] : actions_at_)
        if (t >= al->raised_s && std::find(seats.begin(), seats.end(), by) != seats.end()) {
          e.to_action_s = t - al->raised_s;
          e.action_by = by;
          break;
        }
      if (al->acked_s) {
        e.to_ack_s = *al->acked_s - al->raised_s;
        e.ack_by = al->acked_by.value_or("");
      }
    }
  }

  const JournalRun& run_;
  const FinalLineage& lineage_;
  Debrief& d_;
  std::unique_ptr<Engine> engine_;
  std::optional<AlarmMonitor> alarms_;
  std::optional<ObjectiveMonitor> objectives_;
  std::vector<Notice> pending_;  // since the alarm monitor's last update
  std::vector<std::pair<double, std::string>> actions_at_;
  std::int64_t every_ = 1;
  std::vector<Span> secondary_;
  int actions_ = 0, scripts_ = 0;
};

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

DebriefRun summary_of(const JournalRun& r) {
  DebriefRun s;
  s.run_id = r.run_id;
  s.name = r.exercise ? r.exercise->def.name : r.system.def().name;
  s.to_t_s = static_cast<double>(r.last_step) * r.system.def().step_s;
  if (r.end) {
    s.ended = true;
    s.complete = r.end->complete;
    s.why = r.end->why;
  }
  return s;
}

}  // namespace

std::optional<Debrief> build_debrief(const std::string& journal_path, const std::string& run_id,
                                     const DebriefExtras& extras, std::string& error, std::vector<DebriefRun>* runs) {
  JournalRead jr = read_journal(journal_path);
  if (!jr.issues.empty()) {
    error = jr.issues.front().text();
    return std::nullopt;
  }
  if (jr.runs.empty()) {
    error = "no run in " + journal_path + " (it holds no scenario record)";
    return std::nullopt;
  }
  const JournalRun* run = &jr.runs.back();
  if (!run_id.empty()) {
    const auto it =
        std::find_if(jr.runs.begin(), jr.runs.end(), [&](const JournalRun& r) { return r.run_id == run_id; });
    if (it == jr.runs.end()) {
      error = "no run " + clip_text(run_id, 64) + " in " + journal_path;
      return std::nullopt;
    }
    run = &*it;
  }
  const std::optional<FinalLineage> lineage = final_lineage(*run, error);
  if (!lineage) return std::nullopt;
  if (runs)
    for (const JournalRun& r : jr.runs) runs->push_back(summary_of(r));

  const SystemDef& def = run->system.def();
  Debrief d;
  d.journal = journal_path;
  d.run_id = run->run_id;
  d.is_exercise = run->exercise.has_value();
  const DebriefRun summary = summary_of(*run);
  d.name = summary.name;
  d.f0_hz = def.nominal_hz;
  d.limits = d.is_exercise ? run->exercise->def.alarms : alarm_limits_for(def.nominal_hz);
  if (summary.ended) {
    d.complete = summary.complete;
    d.why = summary.why;
  } else {
    d.why = "the journal has no end record (the session is still running, or stopped before the exercise ended)";
  }
  if (d.is_exercise) {
    d.briefing = run->exercise->def.briefing;
    for (const SeatDef& s : run->exercise->def.seats) d.seats.push_back({s.id, s.name, "", s.areas});
  }
  auto name_seat = [&](const std::string& seat, const std::string& name) {
    for (DebriefSeat& s : d.seats)
      if (s.id == seat) s.trainee = name;
  };
  for (const JournalTrainee& t : run->trainees) name_seat(t.seat, t.name);
  for (const auto& [seat, name] : extras.trainees) name_seat(seat, name);
  for (const JournalNote& n : run->notes) d.notes.push_back({static_cast<double>(n.step) * def.step_s, n.by, n.text});
  d.notes.insert(d.notes.end(), extras.notes.begin(), extras.notes.end());

  Resim(*run, *lineage, d).run();
  for (const JournalMark& m : run->marks)
    d.timeline.push_back(
        {static_cast<double>(m.step) * def.step_s, mark_kind(m.kind), m.by, mark_text(def, m), "", {}, {}, {}, {}});
  std::stable_sort(d.timeline.begin(), d.timeline.end(),
                   [](const DebriefEvent& x, const DebriefEvent& y) { return x.t_s < y.t_s; });
  return d;
}

std::optional<std::string> debrief_html(const std::string& journal_path, const std::string& run_id,
                                        const DebriefExtras& extras, std::string& error,
                                        std::vector<DebriefRun>* runs) {
  std::optional<Debrief> d = build_debrief(journal_path, run_id, extras, error, runs);
  if (!d) return std::nullopt;
  return render_debrief_html(*d);
}

std::optional<nlohmann::ordered_json> debrief_json(const std::string& journal_path, const std::string& run_id,
                                                   const DebriefExtras& extras, std::string& error,
                                                   std::vector<DebriefRun>* runs) {
  std::optional<Debrief> d = build_debrief(journal_path, run_id, extras, error, runs);
  if (!d) return std::nullopt;
  json seats = json::array(), scores = json::array(), timeline = json::array(), dists = json::array(),
       notes = json::array();
  for (const DebriefSeat& s : d->seats)
    seats.push_back(json{{"id", s.id}, {"name", s.name}, {"areas", s.areas}, {"trainee", s.trainee}});
  for (const SeatScore& s : d->scores) scores.push_back(seat_score_to_json(s));
  for (const DebriefEvent& e : d->timeline)
    timeline.push_back(json{{"t_s", e.t_s},
                            {"kind", e.kind},
                            {"by", e.by},
                            {"what", e.what},
                            {"marker", e.marker},
                            {"to_action_s", opt(e.to_action_s)},
                            {"action_by", e.action_by},
                            {"to_ack_s", opt(e.to_ack_s)},
                            {"ack_by", e.ack_by}});
  for (const DebriefDisturbance& x : d->disturbances) {
    json units = json::array();
    for (const DebriefUnit& u : x.units)
      units.push_back(json{{"unit", u.id},
                           {"predicted_mw", u.predicted_mw},
                           {"response_10s_mw", opt(u.response_10s_mw)},
                           {"response_30s_mw", opt(u.response_30s_mw)}});
    dists.push_back(json{{"at_s", x.at_s},
                         {"cause", x.cause},
                         {"delta_mw", x.delta_mw},
                         {"rocof_hz_per_s", opt(x.rocof_hz_per_s)},
                         {"zenith", x.zenith},
                         {"nadir_hz", opt(x.nadir_hz)},
                         {"nadir_at_s", opt(x.nadir_at_s)},
                         {"pre_hz", x.pre_hz},
                         {"settling_hz", opt(x.settling_hz)},
                         {"predicted_settling_hz", x.predicted_settling_hz},
                         {"secondary_in_window", x.secondary_in_window},
                         {"response_mw_per_0p1hz", opt(x.response_mw_per_0p1hz)},
                         {"units", units}});
  }
  for (const DebriefNote& n : d->notes) notes.push_back(json{{"t_s", opt(n.t_s)}, {"by", n.by}, {"text", n.text}});
  json series{{"t_s", d->series.t_s}};
  for (std::size_t i = 0; i < d->series.areas.size(); ++i) {
    series[d->series.areas[i] + ".f_hz"] = d->series.f_hz[i];
    series[d->series.areas[i] + ".ace_mw"] = d->series.ace_mw[i];
  }
  for (std::size_t i = 0; i < d->series.ties.size(); ++i) series[d->series.ties[i] + ".flow_mw"] = d->series.flow_mw[i];
  return json{{"run", d->run_id},
              {"exercise", d->name},
              {"status", json{{"complete", d->complete}, {"why", d->why}, {"end_s", d->end_s}}},
              {"briefing", d->briefing},
              {"seats", seats},
              {"scores", scores},
              {"timeline", timeline},
              {"disturbances", dists},
              {"notes", notes},
              {"series", series}};
}

}  // namespace droopline::study
