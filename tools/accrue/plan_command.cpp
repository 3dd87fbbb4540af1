#include "tools/accrue/plan_command.hpp"

#include <cstdio>
#include <fstream>
#include <map>
#include <optional>

#include "tools/accrue/eng_notation.hpp"
#include "tools/accrue/plan.hpp"
#include "tools/accrue/plan_config.hpp"
#include "tools/accrue/plan_from_db.hpp"
#include "tools/accrue/plan_report.hpp"
#include "tools/accrue/plan_svg.hpp"

namespace accrue::client {

const char* const kPlanUsage = R"(usage: accrue plan --r1 R --c C [--r2 R|none] --input MIN:MAX | --pulse Q:WIDTH:RATE [options]

Plans an integrator front end: response, drift, time to saturation, a reset
threshold and interval, dead time, noise floors, and warnings. Values take
engineering notation: 100k, 4.7n, 1M2, 4n7, 5pA (prefixes p n u µ m k M G).

front end:
  --sensor charge|volt_seconds   what the channel integrates (default charge)
  --r1 R            input resistor, ohm
  --c C             feedback capacitor, F
  --r2 R|none       discharge resistor across C (default none)
  --vos V           op-amp input offset voltage (default 0)
  --ib A            op-amp input bias current (default 0)
  --rail V          output swing, +-V (default 12)
  --adc-bits N      ADC resolution, bipolar (default 24)
  --full-scale V    ADC full scale, +-V (default 10)
  --adc-gain G      gain between integrator output and ADC (default 1)
  --noise V         output noise per reading, rms (default 0)
  --sample-period S ADC sample period (default 1m)
  --dead-time S     reset switch closed time (default 0)
  --pedestal V      output step left by a reset (default 0)
  --settle S        discarded after each reset, as accrued's settle_s (default 2m)
  --end-window N    samples fitted at each segment end (default 16)
  --zero-window S   length of the drift-fit zero window (default none)
expected input (quantity per second: A for charge, V for volt_seconds):
  --input MIN:MAX   a steady input between MIN and MAX (or --input MAX)
  --pulse Q:W:RATE  pulses of Q (C or V·s) lasting W seconds, RATE per second
schedule:
  --margin F        fraction of the headroom kept free (default 0.2)
  --threshold V     check this reset threshold instead of planning one
  --interval S      check this reset interval instead of planning one
  --duration S      length of the run (default 28.8k = 8 h)
outputs:
  --svg FILE        Bode magnitude and phase, practical against ideal
  --emit-config FILE  the calibration and schedule part of an accrued config
                      (- for stdout); --device PATH, --channel N, --non-inverting
  --from-db FILE    compare a recorded run with the plan (--run ID, default newest)
  --json            machine-readable output
)";

namespace {

struct Parser {
  const std::vector<std::string>& args;
  std::size_t i = 0;
  bool failed = false;

  void fail(const std::string& why) {
    std::fprintf(stderr, "accrue plan: %s\n", why.c_str());
    failed = true;
  }
  std::optional<std::string> value(const std::string& name) {
    if (i + 1 >= args.size()) {
      fail(name + " needs a value");
      return std::nullopt;
    }
    return args[++i];
  }
  bool eng(const std::string& name, const std::string& text, const char* unit, double& out) {
    EngValue v = parse_engineering(text, unit);
    if (!v.ok && std::string_view(unit) == "ohm") v = parse_engineering(text, "\xCE\xA9");  // Ω
    if (!v.ok) {
      fail(name + ": " + v.error);
      return false;
    }
    out = v.value;
    return true;
  }
  // Splits "a:b:c" into exactly `n` engineering values.
  bool list(const std::string& name, const std::string& text, std::size_t n, std::vector<double>& out) {
    std::vector<std::string> parts;
    std::size_t start = 0;
    for (;;) {
      const auto colon = text.find(':', start);
      parts.push_back(text.substr(start, colon == std::string::npos ? std::string::npos : colon - start));
      if (colon == std::string::npos) break;
      start = colon + 1;
    }
    if (parts.size() != n) {
      fail(name + " takes " + std::to_string(n) + " values separated by ':', got \"" + text + "\"");
      return false;
    }
    out.clear();
    for (const auto& p : parts) {
      double v = 0;
      if (!eng(name, p, "", v)) return false;
      out.push_back(v);
    }
    return true;
  }
};

bool write_file(const std::string& path, const std::string& text) {
  if (path == "-") {
    std::fputs(text.c_str(), stdout);
    return true;
  }
  std::ofstream f(path, std::ios::binary | std::ios::trunc);
  f << text;
  f.close();
  if (!f) {
    std::fprintf(stderr, "accrue plan: cannot write %s\n", path.c_str());
    return false;
  }
  return true;
}

}  // namespace

int cmd_plan(bool json, const std::vector<std::string>& args) {
  PlanInput in;
  EmitSettings emit;
  std::string svg_path, config_path, db_path;
  long long run_id = 0;
  bool have_r1 = false, have_c = false, have_input = false;
  Parser ps{args};
  // Options that take one engineering value, with the unit symbol they may carry.
  struct EngOption {
    const char* unit;
    double* target;
  };
  std::optional<double> interval, threshold;
  double interval_v = 0, threshold_v = 0;
  const std::map<std::string, EngOption> eng_options = {
      {"--r1", {"ohm", &in.parts.r1_ohm}},       {"--c", {"F", &in.parts.c_farad}},
      {"--vos", {"V", &in.parts.offset_v}},      {"--ib", {"A", &in.parts.bias_a}},
      {"--rail", {"V", &in.rail_v}},             {"--full-scale", {"V", &in.full_scale_v}},
      {"--adc-gain", {"", &in.adc_gain}},        {"--noise", {"V", &in.noise_v}},
      {"--sample-period", {"s", &in.sample_period_s}}, {"--dead-time", {"s", &in.reset_dead_s}},
      {"--pedestal", {"V", &in.pedestal_v}},     {"--settle", {"s", &in.settle_s}},
      {"--zero-window", {"s", &in.zero_window_s}}, {"--margin", {"", &in.margin}},
      {"--duration", {"s", &in.duration_s}},     {"--interval", {"s", &interval_v}},
      {"--threshold", {"V", &threshold_v}},
  };
  for (; ps.i < args.size() && !ps.failed; ++ps.i) {
    const std::string a = args[ps.i];
    if (a == "--help" || a == "-h") {
      std::fputs(kPlanUsage, stdout);
      return 0;
    }
    if (auto it = eng_options.find(a); it != eng_options.end()) {
      const auto v = ps.value(a);
      if (!v || !ps.eng(a, *v, it->second.unit, *it->second.target)) break;
      if (a == "--r1") have_r1 = true;
      if (a == "--c") have_c = true;
      if (a == "--interval") interval = interval_v;
      if (a == "--threshold") threshold = threshold_v;
    } else if (a == "--r2") {
      const auto v = ps.value(a);
      if (!v) break;
      if (*v == "none" || *v == "0") in.parts.r2_ohm = 0;
      else if (!ps.eng(a, *v, "ohm", in.parts.r2_ohm)) break;
    } else if (a == "--sensor") {
      const auto v = ps.value(a);
      if (!v) break;
      if (!chain::parse_sensor_kind(*v, in.sensor)) ps.fail("--sensor must be charge or volt_seconds, got \"" + *v + "\"");
    } else if (a == "--adc-bits" || a == "--end-window" || a == "--channel") {
      const auto v = ps.value(a);
      double d = 0;
      if (!v || !ps.eng(a, *v, "", d)) break;
      if (d != double(int(d))) {
        ps.fail(a + " must be a whole number, got \"" + *v + "\"");
        break;
      }
      (a == "--adc-bits" ? in.adc_bits : a == "--end-window" ? in.end_window : emit.channel) = int(d);
    } else if (a == "--input") {
      const auto v = ps.value(a);
      if (!v) break;
      std::vector<double> xs;
      const bool range = v->find(':') != std::string::npos;
      if (!ps.list(a, *v, range ? 2 : 1, xs)) break;
      in.input_min = range ? xs[0] : 0.0;
      in.input_max = range ? xs[1] : xs[0];
      in.pulsed = false;
      have_input = true;
    } else if (a == "--pulse") {
      const auto v = ps.value(a);
      std::vector<double> xs;
      if (!v || !ps.list(a, *v, 3, xs)) break;
      in.pulsed = true;
      in.pulse_quantity = xs[0];
      in.pulse_width_s = xs[1];
      in.pulse_rate_hz = xs[2];
      have_input = true;
    } else if (a == "--svg" || a == "--emit-config" || a == "--from-db" || a == "--device") {
      const auto v = ps.value(a);
      if (!v) break;
      (a == "--svg" ? svg_path : a == "--emit-config" ? config_path : a == "--from-db" ? db_path : emit.device) = *v;
    } else if (a == "--run") {
      const auto v = ps.value(a);
      if (!v) break;
      run_id = std::atoll(v->c_str());
      if (run_id <= 0) ps.fail("--run must be a run id >= 1, got \"" + *v + "\"");
    } else if (a == "--non-inverting") {
      emit.inverting = false;
    } else {
      ps.fail("unknown option " + a + " (see accrue plan --help)");
    }
  }
  if (ps.failed) return 2;
  if (!have_r1 || !have_c || !have_input) {
    std::fprintf(stderr, "accrue plan: --r1, --c and --input or --pulse are required (see accrue plan --help)\n");
    return 2;
  }
  if (emit.channel < 0 || emit.channel > 254) {
    std::fprintf(stderr, "accrue plan: --channel must be between 0 and 254\n");
    return 2;
  }
  in.interval_s = interval;
  in.threshold_v = threshold;
  if (const auto errors = check_plan_input(in); !errors.empty()) {
    for (const auto& e : errors) std::fprintf(stderr, "accrue plan: %s\n", e.c_str());
    return 2;
  }

  const Plan plan = make_plan(in);
  int rc = 0;
  nlohmann::json out = plan_to_json(in, plan);
  std::string text = plan_to_text(in, plan);
  if (!svg_path.empty() && !write_file(svg_path, bode_svg(chain::FrontEndResponse(in.parts)))) rc = 1;
  if (!config_path.empty() && !write_file(config_path, emit_config(in, plan, emit))) rc = 1;
  if (!db_path.empty()) {
    const DbResult db = read_recorded_run(db_path, run_id, emit.channel);
    if (!db.error.empty()) {
      std::fprintf(stderr, "accrue plan: %s\n", db.error.c_str());
      return 1;
    }
    const Comparison cmp = compare_with_plan(in, plan, db.run);
    out["recorded"] = cmp.json;
    text += "\n" + cmp.text;
    if (!cmp.within_plan) rc = 1;
  }
  // With --emit-config -, stdout carries the config alone.
  if (config_path != "-") std::fputs(json ? (out.dump(2) + "\n").c_str() : text.c_str(), stdout);
  return rc;
}

}  // namespace accrue::client
