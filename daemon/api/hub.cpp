#include "daemon/api/hub.hpp"

namespace accrue::daemon::api {

using nlohmann::json;

std::int64_t Hub::subscribe(std::weak_ptr<Sink> sink, unsigned topics, std::set<int> channels) {
  const std::int64_t id = next_id_++;
  auto locked = sink.lock();
  subs_[id] = Subscription{std::move(sink), locked.get(), topics, std::move(channels)};
  return id;
}

bool Hub::unsubscribe(const Sink* sink, std::int64_t id) {
  auto it = subs_.find(id);
  if (it == subs_.end() || it->second.owner != sink) return false;
  subs_.erase(it);
  return true;
}

std::size_t Hub::subscriptions_of(const Sink* sink) const {
  std::size_t n = 0;
  for (const auto& [id, s] : subs_) n += s.owner == sink ? 1 : 0;
  return n;
}

void Hub::drop(const Sink* sink) {
  for (auto it = subs_.begin(); it != subs_.end();) it = it->second.owner == sink ? subs_.erase(it) : std::next(it);
}

void Hub::send(std::map<std::int64_t, Subscription>::iterator it, const std::string& method, json params) {
  params["subscription"] = it->first;
  const std::string line =
      json{{"jsonrpc", "2.0"}, {"method", method}, {"params", std::move(params)}}.dump(-1, ' ', false,
                                                                                        json::error_handler_t::replace);
  auto sink = it->second.sink.lock();
  if (sink && sink->notify(line)) {
    ++counters_.notifications_sent;
    return;
  }
  if (sink) ++counters_.subscribers_cut_off;
  subs_.erase(it);
}

void Hub::publish_values(const json& header, const json& channels) {
  for (auto it = subs_.begin(); it != subs_.end();) {
    auto next = std::next(it);
    if (it->second.topics & values) {
      json params = header;
      json picked = json::array();
      for (const auto& ch : channels) {
        if (it->second.channels.empty() || it->second.channels.count(ch.value("channel", -1))) picked.push_back(ch);
      }
      params["channels"] = std::move(picked);
      send(it, "values", std::move(params));
    }
    it = next;
  }
}

void Hub::publish_event(const json& event) {
  const int channel = event.contains("channel") && event["channel"].is_number_integer() ? event["channel"].get<int>() : -1;
  for (auto it = subs_.begin(); it != subs_.end();) {
    auto next = std::next(it);
    if ((it->second.topics & events) &&
        (it->second.channels.empty() || channel < 0 || it->second.channels.count(channel)))
      send(it, "event", event);
    it = next;
  }
}

}  // namespace accrue::daemon::api
