#include "storage/chain_settings_json.hpp"

#include <nlohmann/json.hpp>

namespace accrue::storage {

bool parse_baseline_model(const std::string& text, chain::BaselineModel& out) {
  if (text == "linear") out = chain::BaselineModel::linear;
  else if (text == "quadratic") out = chain::BaselineModel::quadratic;
  else return false;
  return true;
}

bool parse_baseline_robust(const std::string& text, chain::BaselineRobust& out) {
  if (text == "none") out = chain::BaselineRobust::none;
  else if (text == "huber") out = chain::BaselineRobust::huber;
  else return false;
  return true;
}

namespace {
const char* model_name(chain::BaselineModel m) { return m == chain::BaselineModel::quadratic ? "quadratic" : "linear"; }
const char* robust_name(chain::BaselineRobust r) { return r == chain::BaselineRobust::huber ? "huber" : "none"; }
}  // namespace

std::string baseline_text(const chain::ChainSettings& s) {
  return std::string(model_name(s.baseline_model)) + " " + robust_name(s.baseline_robust);
}

std::string chain_settings_to_json(const chain::ChainSettings& s) {
  nlohmann::json quiet = nlohmann::json::array();
  for (const auto& q : s.quiet_windows) quiet.push_back({q.first_index, q.last_index});
  const nlohmann::json j = {{"sample_period_s", s.sample_period_s},
                            {"settle_s", s.settle_s},
                            {"end_window", s.end_window},
                            {"series_interval_s", s.series_interval_s},
                            {"clip_fraction", s.clip_fraction},
                            {"min_baseline_samples", s.min_baseline_samples},
                            {"leak_correction", s.leak_correction},
                            {"baseline_model", model_name(s.baseline_model)},
                            {"baseline_robust", robust_name(s.baseline_robust)},
                            {"max_baseline_points", s.max_baseline_points},
                            {"quiet_windows", quiet}};
  return j.dump();
}

std::optional<chain::ChainSettings> chain_settings_from_json(const std::string& text) {
  const auto j = nlohmann::json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  chain::ChainSettings s;
  const auto number = [&](const char* key, auto& field) {
    if (!j.contains(key) || !j[key].is_number()) return false;
    field = j[key].get<std::decay_t<decltype(field)>>();
    return true;
  };
  if (!number("sample_period_s", s.sample_period_s) || !number("settle_s", s.settle_s) ||
      !number("end_window", s.end_window) || !number("series_interval_s", s.series_interval_s) ||
      !number("clip_fraction", s.clip_fraction) || !number("min_baseline_samples", s.min_baseline_samples) ||
      !number("max_baseline_points", s.max_baseline_points))
    return std::nullopt;
  if (!j.contains("leak_correction") || !j["leak_correction"].is_boolean()) return std::nullopt;
  s.leak_correction = j["leak_correction"].get<bool>();
  if (!j.contains("baseline_model") || !j["baseline_model"].is_string() ||
      !parse_baseline_model(j["baseline_model"].get<std::string>(), s.baseline_model))
    return std::nullopt;
  if (!j.contains("baseline_robust") || !j["baseline_robust"].is_string() ||
      !parse_baseline_robust(j["baseline_robust"].get<std::string>(), s.baseline_robust))
    return std::nullopt;
  if (!j.contains("quiet_windows") || !j["quiet_windows"].is_array()) return std::nullopt;
  for (const auto& q : j["quiet_windows"]) {
    if (!q.is_array() || q.size() != 2 || !q[0].is_number_unsigned() || !q[1].is_number_unsigned()) return std::nullopt;
    s.quiet_windows.push_back({q[0].get<std::uint64_t>(), q[1].get<std::uint64_t>()});
  }
  return s;
}

}  // namespace accrue::storage
