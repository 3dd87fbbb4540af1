#pragma once
// Hub fans live values and events out to subscribed clients as JSON-RPC 2.0
// notifications (methods "values" and "event", see docs/api.md). It holds weak
// references to the client sinks: a closed client simply disappears. Publishing
// never blocks: each sink queues or cuts its own client off, so one slow
// subscriber cannot stall ingest or the other subscribers. Asio thread only.
#include <cstdint>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/api/sink.hpp"

namespace accrue::daemon::api {

struct HubCounters {
  std::uint64_t notifications_sent = 0;
  std::uint64_t subscribers_cut_off = 0;
};

class Hub {
 public:
  enum Topic : unsigned { values = 1, events = 2 };
  // channels empty: every channel. Returns the subscription id (> 0).
  std::int64_t subscribe(std::weak_ptr<Sink> sink, unsigned topics, std::set<int> channels);
  // True if the id existed and belonged to `sink`.
  bool unsubscribe(const Sink* sink, std::int64_t id);
  void drop(const Sink* sink);

  // `channels`: the per-channel live values (objects with a "channel" key).
  void publish_values(const nlohmann::json& header, const nlohmann::json& channels);
  // `event`: an object; its optional "channel" key (null: all) filters.
  void publish_event(const nlohmann::json& event);

  std::size_t subscriptions() const { return subs_.size(); }
  std::size_t subscriptions_of(const Sink* sink) const;
  const HubCounters& counters() const { return counters_; }

 private:
  struct Subscription {
    std::weak_ptr<Sink> sink;
    const Sink* owner = nullptr;
    unsigned topics = 0;
    std::set<int> channels;
  };
  void send(std::map<std::int64_t, Subscription>::iterator it, const std::string& method, nlohmann::json params);

  std::map<std::int64_t, Subscription> subs_;
  std::int64_t next_id_ = 1;
  HubCounters counters_;
};

}  // namespace accrue::daemon::api
