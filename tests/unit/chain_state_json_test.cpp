#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include "storage/chain_state_json.hpp"

using accrue::chain::ChainState;
using accrue::storage::chain_state_from_json;
using accrue::storage::chain_state_to_json;

TEST_CASE("chain_state_json: a state round-trips bit-exact", "[storage][checkpoint]") {
  ChainState s;
  s.last_index = 123456789012ull;
  s.total_v = -1.0 / 3.0;
  s.gap_var_v2 = 1e-300;
  s.has_baseline = true;
  s.slope_v_per_s = 2.5e-7;
  s.curvature_v_per_s2 = -1e-12;
  s.has_previous_end = true;
  s.previous_end_rate_v_per_s = 0.1 + 1e-17;
  s.previous_end_changed = true;
  s.segments = 42;
  const auto back = chain_state_from_json(chain_state_to_json(s));
  REQUIRE(back);
  CHECK(back->last_index == s.last_index);
  CHECK(back->total_v == s.total_v);
  CHECK(back->gap_var_v2 == s.gap_var_v2);
  CHECK(back->slope_v_per_s == s.slope_v_per_s);
  CHECK(back->curvature_v_per_s2 == s.curvature_v_per_s2);
  CHECK(back->previous_end_rate_v_per_s == s.previous_end_rate_v_per_s);
  CHECK(back->previous_end_changed);
  CHECK(back->segments == 42);
}

TEST_CASE("chain_state_json: a checkpoint written before the later fields reads with their defaults",
          "[storage][checkpoint]") {
  ChainState s;
  s.previous_end_changed = true;
  s.curvature_var = 3.0;
  auto j = nlohmann::json::parse(chain_state_to_json(s));
  for (const char* later : {"curvature_v_per_s2", "curvature_var", "slope_curvature_cov", "baseline_t0_s",
                            "drift_curvature_span_s2", "previous_end_changed"})
    j.erase(later);
  const auto back = chain_state_from_json(j.dump());
  REQUIRE(back);
  CHECK(back->curvature_var == 0.0);
  CHECK_FALSE(back->previous_end_changed);
}

TEST_CASE("chain_state_json: malformed text or a wrong type is refused", "[storage][checkpoint]") {
  CHECK_FALSE(chain_state_from_json("not json"));
  CHECK_FALSE(chain_state_from_json("[1, 2]"));
  auto j = nlohmann::json::parse(chain_state_to_json(ChainState{}));
  j.erase("total_v");
  CHECK_FALSE(chain_state_from_json(j.dump()));  // a required field missing
  j = nlohmann::json::parse(chain_state_to_json(ChainState{}));
  j["previous_end_changed"] = "yes";
  CHECK_FALSE(chain_state_from_json(j.dump()));
}
