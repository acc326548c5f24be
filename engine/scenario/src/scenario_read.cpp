// Reading a scenario: the JSON shape with `path: message` errors, then the checks of the
// definition and its initial flows (check()), so the result is a CheckedSystem.
#include <filesystem>
#include <fstream>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/page_hint.hpp"
#include "droopline/scenario_io.hpp"
#include "json_fields.hpp"

namespace droopline {

using namespace detail;  // the JSON reader (json_fields.hpp)

namespace {

// The fields of a unit, of its governor and of its turbine, and which of the turbine's each
// type takes (bits of kTurbineFields, in the order of TurbineType): one list for both readers.
constexpr std::string_view kUnitFields[] = {"id", "area", "rating_mw", "inertia_s", "setpoint_mw",
                                            "min_mw", "max_mw", "ramp_mw_per_s", "agc_share", "online",
                                            "start_up_s", "governor", "turbine"};
constexpr std::string_view kGovernorFields[] = {"mode", "droop", "deadband_hz", "deadband", "lag_s", "integral_s"};
constexpr std::string_view kTurbineFields[] = {"type", "steam_chest_s", "reheat_s", "hp_fraction", "water_s",
                                               "temporary_droop", "reset_s", "fuel_s", "combustion_s",
                                               "load_limit_mw", "response_s", "synthetic_inertia_s",
                                               "rocof_filter_s", "energy_mwh", "soc"};

// Where `name` is in `names`, or -1.
template <std::size_t N>
constexpr int index_of(const std::string_view (&names)[N], std::string_view name) {
  for (std::size_t i = 0; i < N; ++i)
    if (names[i] == name) return static_cast<int>(i);
  return -1;
}

// A set of `names` as bits of their places.
template <std::size_t N>
constexpr std::uint32_t bits_of(const std::string_view (&names)[N], std::initializer_list<std::string_view> which) {
  std::uint32_t bits = 0;
  for (std::string_view n : which) bits |= 1u << index_of(names, n);
  return bits;
}
constexpr std::uint32_t kTurbineTakes[] = {
    bits_of(kTurbineFields, {"type", "steam_chest_s"}),                             // steam
    bits_of(kTurbineFields, {"type", "steam_chest_s", "reheat_s", "hp_fraction"}),  // reheat
    bits_of(kTurbineFields, {"type", "water_s", "temporary_droop", "reset_s"}),     // hydro
    bits_of(kTurbineFields, {"type", "fuel_s", "combustion_s", "load_limit_mw"}),   // gas
    bits_of(kTurbineFields, {"type", "response_s", "synthetic_inertia_s", "rocof_filter_s", "energy_mwh", "soc"})};
static_assert(std::size(kTurbineTakes) == static_cast<std::size_t>(TurbineType::battery) + 1);

void read_governor(Reader& r, const ijson& j, const std::string& p, GovernorDef& g) {
  if (!r.object(j, p, kGovernorFields)) return;
  r.choice(j, "mode", p, kModeNames, g.mode);
  r.number(j, "droop", p, g.droop);
  r.number(j, "deadband_hz", p, g.deadband_hz);
  r.choice(j, "deadband", p, kDeadbandNames, g.deadband);
  r.number(j, "lag_s", p, g.lag_s);
  r.number(j, "integral_s", p, g.integral_s);
}

void read_turbine(Reader& r, const ijson& j, const std::string& p, TurbineDef& t) {
  if (!j.is_object()) {
    r.error(p, std::string("must be an object, got ") + type_name(j));
    return;
  }
  if (!r.choice(j, "type", p, kTurbineNames, t.type, true)) return;
  const std::uint32_t takes = kTurbineTakes[static_cast<std::size_t>(t.type)];
  for (auto it = j.begin(); it != j.end(); ++it)
    if (const int f = index_of(kTurbineFields, it.key()); f < 0 || !(takes >> f & 1u))
      r.error(join(p, it.key()), "unknown field for a " + std::string(to_string(t.type)) + " turbine");
  r.number(j, "steam_chest_s", p, t.steam_chest_s);
  r.number(j, "reheat_s", p, t.reheat_s);
  r.number(j, "hp_fraction", p, t.hp_fraction);
  r.number(j, "water_s", p, t.water_s);
  r.number(j, "temporary_droop", p, t.temporary_droop);
  r.number(j, "reset_s", p, t.reset_s);
  r.number(j, "fuel_s", p, t.fuel_s);
  r.number(j, "combustion_s", p, t.combustion_s);
  r.number(j, "load_limit_mw", p, t.load_limit_mw);
  r.number(j, "response_s", p, t.response_s);
  r.number(j, "synthetic_inertia_s", p, t.synthetic_inertia_s);
  r.number(j, "rocof_filter_s", p, t.rocof_filter_s);
  r.number(j, "energy_mwh", p, t.energy_mwh);
  r.number(j, "soc", p, t.soc);
}

template <class F>
void each(Reader& r, const ijson& obj, const std::string& key, const std::string& path, bool required, F&& f) {
  if (const ijson* arr = r.array(obj, key, path, required))
    for (std::size_t i = 0; i < arr->size(); ++i) f((*arr)[i], join(path, key) + "[" + std::to_string(i) + "]");
}

UnitDef read_unit(Reader& r, const ijson& u, const std::string& p) {
  UnitDef ud;
  if (r.object(u, p, kUnitFields)) {
    r.string(u, "id", p, ud.id, true);
    r.string(u, "area", p, ud.area, true);
    r.number(u, "rating_mw", p, ud.rating_mw, true);
    r.number(u, "setpoint_mw", p, ud.setpoint_mw, true);
    r.number(u, "min_mw", p, ud.min_mw);
    r.number(u, "max_mw", p, ud.max_mw);
    r.number(u, "ramp_mw_per_s", p, ud.ramp_mw_per_s);
    r.number(u, "agc_share", p, ud.agc_share);
    r.boolean(u, "online", p, ud.online);
    r.number(u, "start_up_s", p, ud.start_up_s);
    if (const ijson* g = r.field(u, "governor", p, false)) read_governor(r, *g, join(p, "governor"), ud.governor);
    if (const ijson* t = r.field(u, "turbine", p, true)) read_turbine(r, *t, join(p, "turbine"), ud.turbine);
    const bool battery = ud.turbine.type == TurbineType::battery;
    if (!battery && !u.contains("inertia_s")) r.error(join(p, "inertia_s"), "required for a synchronous unit");
    r.number(u, "inertia_s", p, ud.inertia_s);
  }
  return ud;
}

// A unit read from its parse events when nothing about it needs a word: every key known (and
// present once), every value of its field's type, every name one of the names, everything that
// is required there. Anything else is declined and read_unit reads the unit's document, with
// its messages; so for the units taken here read_unit would have found no problem and set the
// same fields to the same values (`fuzz_scenario` and `test_scenario_io` compare the two reads).
// Most of a fleet's load was building, reading and freeing each unit's small document.
class UnitEvents {
 public:
  explicit UnitEvents(const JsonEvents& element) : ev_(element.events), el_(element) {}

  bool read(UnitDef& ud) {
    std::uint32_t seen = 0;
    const bool ok = object(kUnitFields, seen, [&](int f) {
      switch (f) {
        case 0: return text(ud.id);
        case 1: return text(ud.area);
        case 2: return number(ud.rating_mw);
        case 3: return number(ud.inertia_s);
        case 4: return number(ud.setpoint_mw);
        case 5: return number(ud.min_mw);
        case 6: return number(ud.max_mw);
        case 7: return number(ud.ramp_mw_per_s);
        case 8: return number(ud.agc_share);
        case 9: return flag(ud.online);
        case 10: return number(ud.start_up_s);
        case 11: return governor(ud.governor);
        default: return turbine(ud.turbine);
      }
    });
    constexpr std::uint32_t kRequired = bits_of(kUnitFields, {"id", "area", "rating_mw", "setpoint_mw", "turbine"});
    constexpr std::uint32_t kInertia = bits_of(kUnitFields, {"inertia_s"});  // of a synchronous unit
    return ok && (seen & kRequired) == kRequired && (ud.turbine.type == TurbineType::battery || seen & kInertia) &&
           at_ == ev_.size();
  }

 private:
  using Kind = JsonEvents::Kind;

  // An object at hand whose keys are all among `names`, each once (noted in `seen`), and whose
  // values `read_field(place of the key in names)` takes.
  template <std::size_t N, class F>
  bool object(const std::string_view (&names)[N], std::uint32_t& seen, F&& read_field) {
    if (ev_[at_++].kind != Kind::object) return false;
    while (ev_[at_].kind == Kind::key) {
      const int f = index_of(names, el_.text_of(ev_[at_++]));
      if (f < 0 || seen & 1u << f) return false;
      seen |= 1u << f;
      if (!read_field(f)) return false;
    }
    return ev_[at_++].kind == Kind::close;
  }
  bool number(double& out) {
    if (!JsonEvents::is_number(ev_[at_])) return false;
    out = JsonEvents::number(ev_[at_++]);
    return true;
  }
  bool number(std::optional<double>& out) {
    double v = 0.0;
    if (!number(v)) return false;
    out = v;
    return true;
  }
  bool text(std::string& out) {
    if (ev_[at_].kind != Kind::string) return false;
    out = el_.text_of(ev_[at_++]);
    return true;
  }
  bool flag(bool& out) {
    if (ev_[at_].kind != Kind::boolean) return false;
    out = ev_[at_++].boolean;
    return true;
  }
  template <class E>
  bool choice(const std::vector<std::pair<const char*, E>>& options, E& out) {
    if (ev_[at_].kind != Kind::string) return false;
    const E* named = value_named(options, el_.text_of(ev_[at_++]));
    if (named) out = *named;
    return named != nullptr;
  }
  bool governor(GovernorDef& g) {
    std::uint32_t seen = 0;
    return object(kGovernorFields, seen, [&](int f) {
      switch (f) {
        case 0: return choice(kModeNames, g.mode);
        case 1: return number(g.droop);
        case 2: return number(g.deadband_hz);
        case 3: return choice(kDeadbandNames, g.deadband);
        case 4: return number(g.lag_s);
        default: return number(g.integral_s);
      }
    });
  }
  bool turbine(TurbineDef& t) {
    std::uint32_t seen = 0;
    const bool ok = object(kTurbineFields, seen, [&](int f) {
      switch (f) {
        case 0: return choice(kTurbineNames, t.type);
        case 1: return number(t.steam_chest_s);
        case 2: return number(t.reheat_s);
        case 3: return number(t.hp_fraction);
        case 4: return number(t.water_s);
        case 5: return number(t.temporary_droop);
        case 6: return number(t.reset_s);
        case 7: return number(t.fuel_s);
        case 8: return number(t.combustion_s);
        case 9: return number(t.load_limit_mw);
        case 10: return number(t.response_s);
        case 11: return number(t.synthetic_inertia_s);
        case 12: return number(t.rocof_filter_s);
        case 13: return number(t.energy_mwh);
        default: return number(t.soc);
      }
    });
    // A type, and only the fields that type takes (the type may come after them).
    return ok && (seen & 1u) && (seen & ~kTurbineTakes[static_cast<std::size_t>(t.type)]) == 0;
  }

  const std::vector<JsonEvents::Event>& ev_;
  const JsonEvents& el_;
  std::size_t at_ = 0;
};

// About how many units the text holds (every unit has a "turbine"), so that their vector is
// allocated once instead of growing by doubling (each growth moved every unit read so far and
// touched fresh pages: a third of a 10,000-unit load's page faults). At most one unit per 80
// bytes, the shortest a valid unit can be written (a battery with its five required fields), so a
// text naming "turbine" everywhere reserves no more than the same length of real units would, and
// nothing for a text the gate will refuse as too long. Only a hint: without the memory, no reserve.
void reserve_units(std::vector<UnitDef>& units, std::string_view text) {
  constexpr std::size_t kShortestUnitBytes = 80;
  if (text.size() > JsonLimits{}.max_bytes) return;
  constexpr std::string_view kKey = "\"turbine\"";
  std::size_t n = 0;
  for (std::size_t at = detail::find_text(text, kKey); at != std::string_view::npos;
       at = detail::find_text(text, kKey, at + kKey.size()))
    ++n;
  try {
    units.reserve(std::min(n, text.size() / kShortestUnitBytes));
    detail::prepare_pages(units.data(), units.capacity() * sizeof(UnitDef));
  } catch (const std::bad_alloc&) {  // the vector grows as units come instead
  }
}

// The fleet's units, read one by one while the text is parsed.
struct StreamedUnits {
  std::vector<UnitDef> units;  // kept only while none had a problem: after one, nothing is built
  std::vector<Issue> issues;
  std::size_t unlisted = 0;
};

SystemDef read_system(Reader& r, const ijson& j, StreamedUnits& units) {
  SystemDef d;
  if (!r.object(j, "",
                {"name", "nominal_hz", "step_s", "duration_s", "output_every_s", "seed", "areas", "ties", "units",
                 "events", "description"}))
    return d;
  r.string(j, "name", "", d.name);
  r.number(j, "nominal_hz", "", d.nominal_hz);
  r.number(j, "step_s", "", d.step_s);
  r.number(j, "duration_s", "", d.duration_s, true);
  r.number(j, "output_every_s", "", d.output_every_s);
  if (const ijson* seed = r.field(j, "seed", "", false)) {
    if (seed->is_number_unsigned() || (seed->is_number_integer() && seed->get<std::int64_t>() >= 0))
      d.seed = seed->get<std::uint64_t>();
    else
      r.error("seed", std::string("must be a whole number >= 0, got ") +
                          (seed->is_number() ? fmt_num(seed->get<double>()) : type_name(*seed)));
  }
  if (const ijson* desc = r.field(j, "description", "", false); desc && !desc->is_string())
    r.error("description", std::string("must be a string, got ") + type_name(*desc));

  each(r, j, "areas", "", true, [&](const ijson& a, const std::string& p) {
    AreaDef ad;
    if (r.object(a, p, {"id", "demand_mw", "load_damping", "agc", "shedding"})) {
      r.string(a, "id", p, ad.id, true);
      r.number(a, "demand_mw", p, ad.demand_mw, true);
      r.number(a, "load_damping", p, ad.load_damping);
      if (const ijson* agc = r.field(a, "agc", p, false)) {
        const std::string ap = join(p, "agc");
        if (r.object(*agc, ap, {"enabled", "bias_mw_per_hz", "kp", "ki_per_s", "period_s", "mode"})) {
          r.choice(*agc, "mode", ap, kAgcModeNames, ad.agc.mode);
          r.boolean(*agc, "enabled", ap, ad.agc.enabled);
          r.number(*agc, "bias_mw_per_hz", ap, ad.agc.bias_mw_per_hz);
          r.number(*agc, "kp", ap, ad.agc.kp);
          r.number(*agc, "ki_per_s", ap, ad.agc.ki_per_s);
          r.number(*agc, "period_s", ap, ad.agc.period_s);
        }
      }
      each(r, a, "shedding", p, false, [&](const ijson& s, const std::string& sp) {
        SheddingStageDef st;
        if (r.object(s, sp, {"below_hz", "delay_s", "shed_pct"})) {
          r.number(s, "below_hz", sp, st.below_hz, true);
          r.number(s, "delay_s", sp, st.delay_s, true);
          r.number(s, "shed_pct", sp, st.shed_pct, true);
        }
        ad.shedding.push_back(st);
      });
    }
    d.areas.push_back(std::move(ad));
  });

  each(r, j, "ties", "", false, [&](const ijson& t, const std::string& p) {
    TieDef td;
    if (r.object(t, p, {"id", "from", "to", "pmax_mw", "damping_mw_per_hz", "trip_angle_deg", "in_service"})) {
      r.string(t, "id", p, td.id, true);
      r.string(t, "from", p, td.from, true);
      r.string(t, "to", p, td.to, true);
      r.number(t, "pmax_mw", p, td.pmax_mw, true);
      r.number(t, "damping_mw_per_hz", p, td.damping_mw_per_hz);
      r.number(t, "trip_angle_deg", p, td.trip_angle_deg);
      r.boolean(t, "in_service", p, td.in_service);
    }
    d.ties.push_back(std::move(td));
  });

  // The units were read as the parse handed them over (see parse_scenario); their problems go
  // here, in the order a read of the whole document would report them.
  if (r.array(j, "units", "", true)) {
    r.take(std::move(units.issues), units.unlisted);
    d.units = std::move(units.units);
  }

  each(r, j, "events", "", false, [&](const ijson& e, const std::string& p) {
    EventDef ev;
    if (auto c = read_command(r, e, p, true, &ev.at_s)) {
      ev.command = *c;
      d.events.push_back(std::move(ev));
    }
  });
  return d;
}

}  // namespace

// Problems a scenario lists; past them they are counted (a text of a million bad units would
// otherwise take gigabytes to list, and nobody reads past the first screens).
constexpr std::size_t kMaxListedProblems = 1000;

LoadResult parse_scenario(std::string_view json_text) { return detail::parse_scenario(json_text, {}); }

LoadResult detail::parse_scenario(std::string_view json_text, const ParseOptions& options) {
  LoadResult out;
  // A fleet's units are most of a scenario's text: each is read into its definition as soon as
  // the parser has it and then dropped, so the document of the whole fleet never exists at once
  // (for 10,000 units that document was some 30 MB of small allocations).
  StreamedUnits units;
  reserve_units(units.units, json_text);
  Reader unit_reader(units.issues, kMaxListedProblems);
  StreamedArray streamed{"units", [&](ijson&& u, std::size_t i) {
                           UnitDef unit = read_unit(unit_reader, u, "units[" + std::to_string(i) + "]");
                           if (!unit_reader.failed()) units.units.push_back(std::move(unit));
                         },
                         {}};
  if (options.units_from_events)
    streamed.read_events = [&](const JsonEvents& element, std::size_t) {
      std::vector<UnitDef>& kept = units.units;
      if (unit_reader.failed()) {  // nothing is kept after a problem: only whether it has one
        UnitDef scratch;
        return UnitEvents(element).read(scratch);
      }
      if (UnitEvents(element).read(kept.emplace_back())) {
        if (options.units_read_from_events) ++*options.units_read_from_events;
        return true;
      }
      kept.pop_back();
      return false;
    };
  auto j = parse_untrusted_json(json_text, out.issues, JsonLimits{}, streamed);
  if (!j) return out;
  units.unlisted = unit_reader.unlisted();
  Reader r(out.issues, kMaxListedProblems);
  SystemDef def = read_system(r, *j, units);
  if (r.unlisted() > 0)
    out.issues.push_back({"",
                          std::to_string(r.unlisted()) + " more problems not listed (the first " +
                              std::to_string(kMaxListedProblems) + " are)",
                          false});
  if (!out.issues.empty()) return out;  // shape errors first: semantics would only echo them
  CheckResult checked = check(std::move(def));
  out.issues = std::move(checked.issues);
  out.system = std::move(checked.system);
  return out;
}

std::optional<std::string> read_text_file(const std::string& path, std::vector<Issue>& issues) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) {  // a folder would "open" and report a huge size
    issues.push_back({"file", "\"" + path + "\" is not a readable file", false});
    return std::nullopt;
  }
  std::ifstream in(path, std::ios::binary | std::ios::ate);
  std::string text;
  if (in) {
    const auto size = static_cast<std::size_t>(in.tellg());
    text.reserve(size);
    detail::prepare_pages(text.data(), size);
    text.resize(size);
    in.seekg(0);
    in.read(text.data(), static_cast<std::streamsize>(text.size()));
  }
  if (!in) {
    issues.push_back({"file", "cannot read \"" + path + "\"", false});
    return std::nullopt;
  }
  return text;
}

LoadResult load_scenario_file(const std::string& path) {
  LoadResult out;
  const std::optional<std::string> text = read_text_file(path, out.issues);
  return text ? parse_scenario(*text) : out;
}

}  // namespace droopline
