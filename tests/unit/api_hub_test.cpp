#include <catch2/catch.hpp>

#include <memory>
#include <nlohmann/json.hpp>
#include <vector>

#include "daemon/api/hub.hpp"

using namespace accrue::daemon::api;
using nlohmann::json;

namespace {
// A sink with room for `capacity` lines, like a client whose buffer fills.
struct FakeSink : Sink {
  explicit FakeSink(std::size_t capacity) : capacity(capacity) {}
  bool notify(std::string line) override {
    if (!is_open || lines.size() >= capacity) {
      is_open = false;
      return false;
    }
    lines.push_back(json::parse(line));
    return true;
  }
  bool open() const override { return is_open; }
  std::size_t capacity;
  bool is_open = true;
  std::vector<json> lines;
};
}  // namespace

TEST_CASE("api hub: a subscriber that stops taking lines is dropped and the others keep their stream") {
  Hub hub;
  auto slow = std::make_shared<FakeSink>(2);
  auto fast = std::make_shared<FakeSink>(1000);
  hub.subscribe(slow, Hub::values, {});
  const auto fast_id = hub.subscribe(fast, Hub::values | Hub::events, {});
  for (int i = 0; i < 10; ++i) hub.publish_values({{"next_index", i}}, json::array({{{"channel", 0}, {"total", i}}}));
  CHECK(slow->lines.size() == 2);
  CHECK_FALSE(slow->is_open);
  REQUIRE(fast->lines.size() == 10);
  CHECK(fast->lines[9]["method"] == "values");
  CHECK(fast->lines[9]["params"]["next_index"] == 9);
  CHECK(fast->lines[9]["params"]["subscription"] == fast_id);
  CHECK(hub.subscriptions() == 1);
  CHECK(hub.counters().subscribers_cut_off == 1);
}

TEST_CASE("api hub: topics and channel filters pick what each subscriber gets") {
  Hub hub;
  auto values_ch1 = std::make_shared<FakeSink>(100);
  auto events_only = std::make_shared<FakeSink>(100);
  hub.subscribe(values_ch1, Hub::values, {1});
  hub.subscribe(events_only, Hub::events, {});
  hub.publish_values({}, json::array({{{"channel", 0}}, {{"channel", 1}}}));
  hub.publish_event({{"kind", "board_reset_begin"}, {"channel", 0}});
  REQUIRE(values_ch1->lines.size() == 1);
  CHECK(values_ch1->lines[0]["params"]["channels"].size() == 1);
  CHECK(values_ch1->lines[0]["params"]["channels"][0]["channel"] == 1);
  REQUIRE(events_only->lines.size() == 1);
  CHECK(events_only->lines[0]["method"] == "event");
  CHECK(events_only->lines[0]["params"]["kind"] == "board_reset_begin");
}

TEST_CASE("api hub: a closed client disappears and unsubscribe needs the owning connection") {
  Hub hub;
  auto a = std::make_shared<FakeSink>(100);
  auto b = std::make_shared<FakeSink>(100);
  const auto id = hub.subscribe(a, Hub::values, {});
  hub.subscribe(b, Hub::values, {});
  CHECK_FALSE(hub.unsubscribe(b.get(), id));
  b.reset();
  hub.publish_values({}, json::array());
  CHECK(hub.subscriptions() == 1);
  CHECK(hub.unsubscribe(a.get(), id));
  CHECK(hub.subscriptions() == 0);
}
