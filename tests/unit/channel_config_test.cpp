#include <catch2/catch.hpp>

#include "daemon/chain/si_value.hpp"
#include "daemon/options.hpp"

using namespace accrue;
using Catch::Matchers::WithinRel;

namespace {
std::vector<daemon::ConfigError> load(const std::string& text, daemon::DaemonConfig& c) {
  return daemon::load_config_text(text, c);
}
bool has_error(const std::vector<daemon::ConfigError>& e, const std::string& key, const std::string& part) {
  for (const auto& x : e)
    if (x.key == key && x.reason.find(part) != std::string::npos) return true;
  return false;
}
}  // namespace

TEST_CASE("channel_config: SI values with prefixes, and the wrong unit is caught", "[config][calibration]") {
  // SI prefixes from the BIPM SI Brochure, 9th ed., Table 7.
  CHECK_THAT(chain::parse_si_value("4.7 nF", {"F"}).value, WithinRel(4.7e-9, 1e-15));
  CHECK_THAT(chain::parse_si_value("1GΩ", {"ohm", "Ω"}).value, WithinRel(1e9, 1e-15));
  CHECK_THAT(chain::parse_si_value("2.5 pC/N", {"C/N"}).value, WithinRel(2.5e-12, 1e-15));
  CHECK_THAT(chain::parse_si_value("3 cm²", {"m²", "m2"}).value, WithinRel(3e-4, 1e-15));
  CHECK_THAT(chain::parse_si_value("12", {"F"}).value, WithinRel(12.0, 1e-15));
  const auto bad = chain::parse_si_value("4.7 kohm", {"F"});
  CHECK_FALSE(bad.ok);
  CHECK(bad.error.find("expected a value in F") != std::string::npos);
  CHECK_FALSE(chain::parse_si_value("nF", {"F"}).ok);
}

TEST_CASE("channel_config: sensor models load with their parameters", "[config][calibration]") {
  daemon::DaemonConfig c;
  const auto e = load(R"({"channels": [
      {"channel": 0, "sensor": "flux_density", "r1_ohm": "10 kΩ", "c_farad": "1 µF", "turns": 200, "area_m2": "10 cm²"},
      {"channel": 1, "sensor": "rogowski_current", "r1_ohm": 1e5, "c_farad": 1e-7, "mutual_inductance_h": "200 nH"},
      {"channel": 2, "sensor": "piezo_force", "charge_sensitivity_c_per_n": "4 pC/N", "c_farad": "1 nF",
       "baseline": "quadratic", "robust": "huber", "leak_correction": false}
    ]})",
                      c);
  REQUIRE(e.empty());
  CHECK(c.channels[0].sensor == chain::SensorKind::flux_density);
  CHECK_THAT(c.channels[0].sensor_model.area_m2, WithinRel(1e-3, 1e-12));
  CHECK_THAT(*c.channels[0].c_farad, WithinRel(1e-6, 1e-12));
  CHECK_THAT(c.channels[1].sensor_model.mutual_inductance_h, WithinRel(2e-7, 1e-12));
  CHECK_THAT(c.channels[2].sensor_model.charge_sensitivity, WithinRel(4e-12, 1e-12));
  CHECK(c.channels[2].baseline_model == chain::BaselineModel::quadratic);
  CHECK(c.channels[2].baseline_robust == chain::BaselineRobust::huber);
  CHECK_FALSE(c.channels[2].leak_correction);
}

TEST_CASE("channel_config: unit and parameter errors name the key and the reason", "[config][calibration]") {
  daemon::DaemonConfig c;
  const auto e = load(R"({"channels": [
      {"channel": 0, "c_farad": "4.7 kohm"},
      {"channel": 1, "sensor": "flux_density", "r1_ohm": 1e4},
      {"channel": 2, "sensor": "rogowski_current"},
      {"channel": 3, "sensor": "piezo_force", "charge_sensitivity_c_s2_per_m": 1e-12},
      {"channel": 4, "sensor": "tesla"},
      {"channel": 5, "baseline": "cubic"}
    ]})",
                      c);
  CHECK(has_error(e, "channels[0].c_farad", "expected a value in F"));
  CHECK(has_error(e, "channels[1].turns", "required"));
  CHECK(has_error(e, "channels[1].area_m2", "required"));
  CHECK(has_error(e, "channels[2].r1_ohm", "required"));
  CHECK(has_error(e, "channels[2].mutual_inductance_h", "required"));
  CHECK(has_error(e, "channels[3].charge_sensitivity_c_s2_per_m", "piezo_acceleration only"));
  CHECK(has_error(e, "channels[4].sensor", "must be charge"));
  CHECK(has_error(e, "channels[5].baseline", "linear or quadratic"));
}
