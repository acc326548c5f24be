#pragma once
// The bad-input table of the scenario loader: a valid base scenario and, per row, one change
// and the exact `path: message` it must give. Shared by the loader's tests (test_scenario_io)
// and the command line's (test_cli: `droopline run` refuses each with exit 2, writing nothing).
#include <string>

#include <nlohmann/json.hpp>

namespace bad_input {

/// A valid scenario the bad-input table changes one field of.
inline const char* const kBase = R"({
  "name": "validation base",
  "nominal_hz": 50,
  "duration_s": 60,
  "areas": [
    { "id": "west", "demand_mw": 600, "shedding": [ { "below_hz": 49.0, "delay_s": 0.1, "shed_pct": 5 } ] },
    { "id": "east", "demand_mw": 400 }
  ],
  "ties": [ { "id": "link", "from": "west", "to": "east", "pmax_mw": 800, "damping_mw_per_hz": 100 } ],
  "units": [
    { "id": "G1", "area": "west", "rating_mw": 500, "inertia_s": 5, "setpoint_mw": 400,
      "governor": { "droop": 0.05 }, "turbine": { "type": "steam" } },
    { "id": "G2", "area": "east", "rating_mw": 600, "inertia_s": 4, "setpoint_mw": 450,
      "turbine": { "type": "reheat" } },
    { "id": "B1", "area": "east", "rating_mw": 50, "inertia_s": 0, "setpoint_mw": 0,
      "turbine": { "type": "battery", "energy_mwh": 20 } },
    { "id": "H1", "area": "west", "rating_mw": 300, "inertia_s": 4, "setpoint_mw": 150,
      "turbine": { "type": "hydro", "water_s": 1.5 } }
  ],
  "events": [
    { "at_s": 1, "kind": "load_step", "area": "west", "mw": 30 },
    { "at_s": 20, "kind": "setpoint", "unit": "G1", "mw": 420 }
  ]
})";

/// One row of the bad-input table.
struct BadCase {
  const char* pointer;   // JSON pointer to change
  const char* value;     // new JSON value; nullptr removes the field
  const char* expected;  // exact `path: message` that must be among the errors
};

/// Each rule of the loader, broken once, with its exact message.
inline const BadCase kBad[] = {
    {"/units/0/governor/droop", "-0.05", "units[0].governor.droop: must lie within [0.001, 1], got -0.05"},
    {"/units/0/rating_mw", "0", "units[0].rating_mw: must be > 0, got 0"},
    {"/units/0/govrnor", "{}", "units[0].govrnor: unknown field"},
    {"/units/1/id", "\"G1\"", "units[1].id: duplicate id \"G1\" (also units[0])"},
    {"/units/0/area", "\"nowhere\"", "units[0].area: unknown area \"nowhere\""},
    {"/ties/0/to", "\"x\"", "ties[0].to: unknown area \"x\""},
    {"/ties/0/to", "\"west\"", "ties[0].to: must differ from \"from\" (\"west\")"},
    {"/units/1/turbine/hp_fraction", "1.5", "units[1].turbine.hp_fraction: must lie within [0, 1], got 1.5"},
    {"/units/0/setpoint_mw", "600", "units[0].setpoint_mw: must lie within [min_mw, max_mw] = [0, 500], got 600"},
    {"/units/0/min_mw", "600", "units[0].min_mw: must be <= max_mw (500), got 600"},
    {"/step_s", "0", "step_s: must be > 0, got 0"},
    {"/step_s", "0.05", "step_s: 0.05 s is too large for the fastest time constant, units[2].turbine.response_s = 0.1 s: the fixed RK4 step must be at most a fifth of it (0.02 s) to stay accurate and stable"},
    {"/output_every_s", "0.015", "output_every_s: must be a whole multiple of step_s (0.01), got 0.015"},
    {"/duration_s", nullptr, "duration_s: required"},
    {"/areas/0/demand_mw", "\"600\"", "areas[0].demand_mw: must be a number, got a string"},
    {"/units/0/turbine/type", "\"nuclear\"", "units[0].turbine.type: must be one of \"steam\", \"reheat\", \"hydro\", \"gas\", \"battery\", got \"nuclear\""},
    {"/events/0/kind", "\"explode\"", "events[0].kind: must be one of \"load_step\", \"load_ramp\", \"unit_trip\", \"unit_start\", \"setpoint\", \"governor\", \"tie_trip\", \"tie_close\", \"agc\", \"fluctuation\", \"unit_stop\", \"schedule\", \"shed\", \"restore\", got \"explode\""},
    {"/events/1/unit", "\"G9\"", "events[1].unit: unknown unit \"G9\""},
    {"/events/0/at_s", "100", "events[0].at_s: must lie within [0, duration_s] = [0, 60], got 100"},
    {"/units/2/inertia_s", "3", "units[2].inertia_s: a battery has no physical inertia, got 3 (use turbine.synthetic_inertia_s)"},
    {"/units/2/turbine/energy_mwh", nullptr, "units[2].turbine.energy_mwh: required for a battery"},
    {"/areas/1/demand_mw", "420", "areas: generation 1000.0 MW does not balance demand 1020.0 MW in the island {west, east} (allowed difference 0.1 MW)"},
    {"/ties/0/pmax_mw", "40", "ties: the scheduled exchanges of the island {west, east} exceed what its ties can carry below the 90 degree pull-out angle (largest area surplus 50.0 MW in \"west\")"},
    {"/units/1/area", "\"west\"", "areas[1]: area \"east\" has no inertia: no online synchronous unit with inertia_s > 0"},
    {"/areas/0/shedding/0/shed_pct", "0", "areas[0].shedding[0].shed_pct: must lie within (0, 100], got 0"},
    {"/areas/0/shedding/0/below_hz", "51", "areas[0].shedding[0].below_hz: must lie between 0 and nominal_hz (50), got 51"},
    {"/events/0/unit", "\"G1\"", "events[0].unit: unknown field for load_step"},
    {"/units/0/governor/deadband", "\"square\"", "units[0].governor.deadband: must be one of \"offset\", \"step\", got \"square\""},
    {"/seed", "-1", "seed: must be a whole number >= 0, got -1"},
    {"/units/0/governor/deadband_hz", "-0.01", "units[0].governor.deadband_hz: must be >= 0, got -0.01"},
    {"/areas/0/id", "\"we st\"", "areas[0].id: must be 1-64 letters, digits, '_' or '-', got \"we st\""},
    {"/events/1/mw", "900", "events[1].mw: must lie within [min_mw, max_mw] = [0, 500] of unit \"G1\", got 900"},
    {"/events/1", R"({"at_s": 2, "kind": "governor", "unit": "G1"})", "events[1]: a governor command needs at least one of droop, deadband_hz, deadband, mode"},
    {"/units/0/inertia_s", nullptr, "units[0].inertia_s: required for a synchronous unit"},
    {"/units/1/turbine/reheat_s", "0", "units[1].turbine.reheat_s: must be > 0, got 0"},
    {"/units/3/turbine/water_s", "-1", "units[3].turbine.water_s: must be > 0, got -1"},
    {"/ties/0/pmax_mw", "-5", "ties[0].pmax_mw: must be > 0, got -5"},
    {"/areas/0/agc", R"({"enabled": "yes"})", "areas[0].agc.enabled: must be true or false, got a string"},
    // Physical bounds: finite is not yet sensible.
    {"/events/0/mw", "1e308", "events[0].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got 1e+308"},
    {"/events/0/mw", "-9000", "events[0].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got -9000"},
    {"/events/0", R"({"at_s": 1, "kind": "load_ramp", "area": "east", "mw": 20000, "over_s": 5})", "events[0].mw: must lie within +/-6500 MW (ten times the size of area \"east\", 650 MW), got 20000"},
    {"/events/0", R"({"at_s": 1, "kind": "fluctuation", "area": "east", "sigma_mw": 5000, "tau_s": 5})", "events[0].sigma_mw: must be at most 650 MW (the size of area \"east\", 650 MW), got 5000"},
    {"/events/1", R"({"at_s": 2, "kind": "governor", "unit": "G1", "droop": 3})", "events[1].droop: must lie within [0.001, 1], got 3"},
    {"/events/1", R"({"at_s": 2, "kind": "setpoint", "unit": "G1", "mw": 410, "ramp_mw_per_s": 1e12})", "events[1].ramp_mw_per_s: must be at most 1e+06 MW/s (beyond what a real system can have), got 1e+12"},
    {"/units/0/rating_mw", "3e6", "units[0].rating_mw: must be at most 2e+06 MW (beyond what a real system can have), got 3e+06"},
    {"/units/0/inertia_s", "1000", "units[0].inertia_s: must be at most 100 s (beyond what a real system can have), got 1000"},
    {"/areas/0/demand_mw", "1e9", "areas[0].demand_mw: must be at most 2e+06 MW (beyond what a real system can have), got 1e+09"},
    {"/nominal_hz", "1e5", "nominal_hz: must lie within [10, 1000], got 100000"},
    {"/duration_s", "1e8", "duration_s: must be at most 1e+07 s (beyond what a real system can have), got 1e+08"},
    {"/step_s", "2", "step_s: must be at most 1 s (beyond what a real system can have), got 2"},
    {"/units/1/turbine/reheat_s", "1e5", "units[1].turbine.reheat_s: must be at most 10000 s (beyond what a real system can have), got 100000"},
    {"/units/2/turbine/energy_mwh", "1e9", "units[2].turbine.energy_mwh: must be at most 1e+06 MWh (beyond what a real system can have), got 1e+09"},
    {"/ties/0/pmax_mw", "1e7", "ties[0].pmax_mw: must be at most 2e+06 MW (beyond what a real system can have), got 1e+07"},
    {"/units/0/governor/droop", "5", "units[0].governor.droop: must lie within [0.001, 1], got 5"},
    {"/units/0/governor/deadband_hz", "10", "units[0].governor.deadband_hz: must be at most 5 Hz (beyond what a real system can have), got 10"},
    {"/areas/0/agc", R"({"enabled": true, "ki_per_s": 1000})", "areas[0].agc.ki_per_s: must be at most 100 /s (beyond what a real system can have), got 1000"},
    {"/units/0/ramp_mw_per_s", "1e9", "units[0].ramp_mw_per_s: must be at most 1e+06 MW/s (beyond what a real system can have), got 1e+09"},
    // Operator actions: start-up time, stop, schedule, shedding by hand, secondary-control mode.
    {"/units/0/start_up_s", "-1", "units[0].start_up_s: must be >= 0, got -1"},
    {"/units/0/start_up_s", "1e6", "units[0].start_up_s: must be at most 100000 s (beyond what a real system can have), got 1e+06"},
    {"/areas/0/agc", R"({"enabled": true, "mode": "flat"})", "areas[0].agc.mode: must be one of \"tie_line_bias\", \"constant_frequency\", \"constant_interchange\", got \"flat\""},
    {"/events/1", R"({"at_s": 2, "kind": "agc", "area": "west", "enabled": true, "mode": "isochronous"})", "events[1].mode: must be one of \"tie_line_bias\", \"constant_frequency\", \"constant_interchange\", got \"isochronous\""},
    {"/events/1", R"({"at_s": 2, "kind": "unit_stop", "unit": "G1", "ramp_mw_per_s": 0})", "events[1].ramp_mw_per_s: must be > 0, got 0"},
    {"/events/1", R"({"at_s": 2, "kind": "unit_stop", "unit": "G1", "mw": 5})", "events[1].mw: unknown field for unit_stop"},
    {"/events/1", R"({"at_s": 2, "kind": "schedule", "area": "west", "mw": 1e9})", "events[1].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got 1e+09"},
    {"/events/1", R"({"at_s": 2, "kind": "schedule", "area": "west", "mw": 50, "over_s": -1})", "events[1].over_s: must be >= 0, got -1"},
    {"/events/1", R"({"at_s": 2, "kind": "schedule", "area": "west"})", "events[1].mw: required"},
    {"/events/1", R"({"at_s": 2, "kind": "shed", "area": "west", "mw": 0})", "events[1].mw: must be > 0, got 0"},
    {"/events/1", R"({"at_s": 2, "kind": "shed", "area": "nowhere", "mw": 10})", "events[1].area: unknown area \"nowhere\""},
    {"/events/1", R"({"at_s": 2, "kind": "restore", "area": "west", "mw": -5})", "events[1].mw: must be > 0, got -5"},
    {"/events/1", R"({"at_s": 2, "kind": "restore", "area": "west", "mw": 1e5})", "events[1].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got 100000"},
    {"/units/2/min_mw", "-1e7", "units[2].min_mw: must be at least -2e+06 MW (beyond what a real system can have), got -1e+07"},
};

/// The base scenario with the row's change made, as JSON text.
inline std::string mutate(const BadCase& c) {
  nlohmann::ordered_json j = nlohmann::ordered_json::parse(kBase);
  const nlohmann::ordered_json::json_pointer ptr(c.pointer);
  if (c.value)
    j[ptr] = nlohmann::ordered_json::parse(c.value);
  else
    j[ptr.parent_pointer()].erase(ptr.back());
  return j.dump(2);
}

}  // namespace bad_input
