#include "daemon/board_commands.hpp"

#include <vector>

namespace accrue::daemon {

BoardCommands::BoardCommands(BoardCommandSettings settings, Send send)
    : settings_(settings), send_(std::move(send)) {}

std::uint16_t BoardCommands::next_id() {
  // Skip 0 and ids still pending, so an ack can never match the wrong command.
  do {
    last_id_ = std::uint16_t(last_id_ + 1);
  } while (last_id_ == 0 || pending_.count(last_id_));
  return last_id_;
}

std::uint16_t BoardCommands::submit(protocol::CommandOp op, std::uint32_t argument, double now_s, Done done) {
  if (pending_.size() >= settings_.max_pending) {
    ++counters_.refused;
    return 0;
  }
  ++counters_.submitted;
  const std::uint16_t id = next_id();
  Pending& p = pending_[id];
  p.command = protocol::BoardCommand{id, op, argument};
  p.attempts = 1;
  p.sent_at_s = now_s;
  p.done = std::move(done);
  ++counters_.sends;
  send_(p.command);
  return id;
}

void BoardCommands::on_ack(const protocol::CommandAck& ack, double now_s) {
  auto it = pending_.find(ack.request_id);
  if (it == pending_.end()) {
    ++counters_.unknown_acks;
    return;
  }
  Pending p = std::move(it->second);
  pending_.erase(it);
  ++counters_.acked;
  if (p.done) p.done({ack.request_id, p.command.op, CommandOutcome::acked, ack.status, p.attempts, now_s - p.sent_at_s});
}

void BoardCommands::tick(double now_s) {
  std::vector<std::uint16_t> expired;
  for (auto& [id, p] : pending_) {
    if (now_s - p.sent_at_s < settings_.timeout_s) continue;
    if (p.attempts < settings_.max_attempts) {
      ++p.attempts;
      p.sent_at_s = now_s;
      ++counters_.sends;
      ++counters_.retries;
      send_(p.command);
    } else {
      expired.push_back(id);
    }
  }
  for (std::uint16_t id : expired) {
    Pending p = std::move(pending_[id]);
    pending_.erase(id);
    ++counters_.timed_out;
    if (p.done) p.done({id, p.command.op, CommandOutcome::timed_out, protocol::AckStatus::ok, p.attempts, 0.0});
  }
}

void BoardCommands::abandon_all() {
  auto pending = std::move(pending_);
  pending_.clear();
  for (auto& [id, p] : pending) {
    ++counters_.abandoned;
    if (p.done) p.done({id, p.command.op, CommandOutcome::link_lost, protocol::AckStatus::ok, p.attempts, 0.0});
  }
}

}  // namespace accrue::daemon
