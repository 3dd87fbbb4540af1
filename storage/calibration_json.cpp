#include "storage/calibration_json.hpp"

#include <nlohmann/json.hpp>

namespace accrue::storage {

std::string calibration_definition(const chain::Calibration& cal) {
  const nlohmann::json def = {
      {"adc", {{"bits", cal.adc.bits}, {"zero_code", cal.adc.zero_code}, {"full_scale_v", cal.adc.full_scale_v},
               {"gain", cal.adc.gain}, {"bipolar", cal.adc.bipolar}}},
      {"front_end", {{"r1_ohm", cal.front_end.r1_ohm}, {"c_farad", cal.front_end.c_farad},
                     {"r2_ohm", cal.front_end.r2_ohm}, {"inverting", cal.front_end.inverting}}},
      {"sensor", std::string(chain::to_string(cal.sensor))},
      {"sensor_model", {{"turns", cal.sensor_model.turns}, {"area_m2", cal.sensor_model.area_m2},
                        {"mutual_inductance_h", cal.sensor_model.mutual_inductance_h},
                        {"sensitivity_v_per_m_per_s", cal.sensor_model.sensitivity_v_per_m_per_s},
                        {"charge_sensitivity", cal.sensor_model.charge_sensitivity}}}};
  return def.dump();
}

std::optional<chain::Calibration> calibration_from_definition(const std::string& text) {
  const auto j = nlohmann::json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  chain::Calibration c;
  bool ok = true;
  const auto get = [&](const nlohmann::json& obj, const char* key, auto& field) {
    using T = std::decay_t<decltype(field)>;
    if (!obj.is_object() || !obj.contains(key)) return void(ok = false);
    const auto& v = obj[key];
    if constexpr (std::is_same_v<T, bool>) {
      if (!v.is_boolean()) return void(ok = false);
    } else {
      if (!v.is_number()) return void(ok = false);
    }
    field = v.get<T>();
  };
  const nlohmann::json none = nlohmann::json::object();
  const auto& adc = j.contains("adc") ? j["adc"] : none;
  const auto& fe = j.contains("front_end") ? j["front_end"] : none;
  const auto& sm = j.contains("sensor_model") ? j["sensor_model"] : none;
  get(adc, "bits", c.adc.bits);
  get(adc, "zero_code", c.adc.zero_code);
  get(adc, "full_scale_v", c.adc.full_scale_v);
  get(adc, "gain", c.adc.gain);
  get(adc, "bipolar", c.adc.bipolar);
  get(fe, "r1_ohm", c.front_end.r1_ohm);
  get(fe, "c_farad", c.front_end.c_farad);
  get(fe, "r2_ohm", c.front_end.r2_ohm);
  get(fe, "inverting", c.front_end.inverting);
  get(sm, "turns", c.sensor_model.turns);
  get(sm, "area_m2", c.sensor_model.area_m2);
  get(sm, "mutual_inductance_h", c.sensor_model.mutual_inductance_h);
  get(sm, "sensitivity_v_per_m_per_s", c.sensor_model.sensitivity_v_per_m_per_s);
  get(sm, "charge_sensitivity", c.sensor_model.charge_sensitivity);
  if (!ok || !j.contains("sensor") || !j["sensor"].is_string() ||
      !chain::parse_sensor_kind(j["sensor"].get<std::string>(), c.sensor))
    return std::nullopt;
  return c;
}

}  // namespace accrue::storage
