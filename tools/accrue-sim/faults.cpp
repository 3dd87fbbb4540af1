#include "tools/accrue-sim/faults.hpp"

#include <cmath>

#include "protocol/frame.hpp"

namespace accrue::sim {

using protocol::Message;
using protocol::SampleBlock;

bool FaultSettings::any() const {
  return corrupt_byte_rate > 0 || drop_frame_rate > 0 || garbage_burst_rate > 0 || !cable_pull_at_s.empty() ||
         reboot_at_s >= 0 || clock_skew_ppm != 0 || stall_at_s >= 0;
}

nlohmann::json FaultCounts::to_json() const {
  return {{"messages", messages},
          {"frames_sent", frames_sent},
          {"frames_dropped", frames_dropped},
          {"frames_corrupted", frames_corrupted},
          {"bytes_corrupted", bytes_corrupted},
          {"frames_lost_to_pulls", frames_lost_to_pulls},
          {"frames_truncated", frames_truncated},
          {"garbage_bursts", garbage_bursts},
          {"garbage_bytes", garbage_bytes},
          {"expect_bad_crc", expect_bad_crc},
          {"expect_bad_version", expect_bad_version},
          {"expect_oversize", expect_oversize},
          {"expect_unseen", expect_unseen},
          {"expect_false_syncs", expect_false_syncs},
          {"expect_discarded_bytes", expect_discarded_bytes},
          {"sample_blocks_lost", sample_blocks_lost},
          {"samples_lost", samples_lost},
          {"expect_gaps", expect_gaps},
          {"expect_missing_samples", expect_missing_samples},
          {"samples_lost_at_session_edges", samples_lost_at_session_edges},
          {"cable_pulls", cable_pulls},
          {"stalls", stalls},
          {"reboots", reboots}};
}

FaultInjector::FaultInjector(FaultSettings settings, bool framed)
    : settings_(std::move(settings)), framed_(framed), rng_(settings_.seed) {
  bytes_to_next_corruption_ = draw_skip();
}

// Bytes before the next altered one: a geometric draw, so a rate of 1e-4 costs
// one draw per altered byte instead of one per byte.
std::uint64_t FaultInjector::draw_skip() {
  const double p = settings_.corrupt_byte_rate;
  if (!(p > 0)) return UINT64_MAX;
  if (p >= 1) return 0;
  std::geometric_distribution<std::uint64_t> g(p);
  return g(rng_);
}

FaultCounts FaultInjector::counts() const {
  FaultCounts c = counts_;
  c.samples_lost_at_session_edges += pending_lost_samples_;
  return c;
}

void FaultInjector::hunted(const std::vector<std::uint8_t>& wire, std::size_t from, std::size_t to) {
  if (from >= to) return;
  using protocol::frame::kSync0, protocol::frame::kSync1;
  if (pending_sync0_ && wire[from] == kSync1) ++counts_.expect_false_syncs;
  for (std::size_t p = from; p + 1 < to; ++p)
    if (wire[p] == kSync0 && wire[p + 1] == kSync1) ++counts_.expect_false_syncs;
  pending_sync0_ = wire[to - 1] == kSync0;
}

void FaultInjector::set_cable_out(bool out) {
  if (out && !cable_out_) ++counts_.cable_pulls;
  cable_out_ = out;
}

bool FaultInjector::take_stall(std::size_t& offset) {
  if (!stall_ready_) return false;
  stall_ready_ = false;
  offset = stall_offset_;
  return true;
}

void FaultInjector::new_session() {
  ++counts_.reboots;
  counts_.samples_lost_at_session_edges += pending_lost_samples_;
  pending_lost_samples_ = 0;
  session_has_block_ = false;
}

void FaultInjector::lose(const Message& m) {
  if (auto* b = std::get_if<SampleBlock>(&m)) {
    ++counts_.sample_blocks_lost;
    counts_.samples_lost += b->samples_per_channel;
    pending_lost_samples_ += b->samples_per_channel;
  }
}

void FaultInjector::garbage(std::vector<std::uint8_t>& wire) {
  std::uniform_int_distribution<int> len(1, std::max(1, settings_.garbage_burst_max_bytes));
  std::uniform_int_distribution<int> byte(0, 254);
  const int n = len(rng_);
  const std::size_t start = wire.size();
  for (int i = 0; i < n; ++i) {
    // Never the first sync byte, so a burst cannot start a false frame and
    // every one of its bytes is discarded (and counted) by a correct decoder.
    int b = byte(rng_);
    if (b >= protocol::frame::kSync0) ++b;
    wire.push_back(std::uint8_t(b));
  }
  if (framed_) hunted(wire, start, wire.size());
  ++counts_.garbage_bursts;
  counts_.garbage_bytes += std::uint64_t(n);
  counts_.expect_discarded_bytes += std::uint64_t(n);
}

void FaultInjector::corrupt_into(std::span<const std::uint8_t> bytes, std::vector<std::uint8_t>& wire) {
  const std::size_t start = wire.size();
  wire.insert(wire.end(), bytes.begin(), bytes.end());
  if (bytes_to_next_corruption_ >= bytes.size()) {
    if (bytes_to_next_corruption_ != UINT64_MAX) bytes_to_next_corruption_ -= bytes.size();
    return;
  }
  std::uniform_int_distribution<int> mask(1, 255);
  std::size_t first = SIZE_MAX;
  std::size_t at = std::size_t(bytes_to_next_corruption_);
  while (at < bytes.size()) {
    wire[start + at] ^= std::uint8_t(mask(rng_));
    ++counts_.bytes_corrupted;
    if (first == SIZE_MAX) first = at;
    const std::uint64_t skip = draw_skip();
    if (skip == UINT64_MAX || skip >= bytes.size() - at - 1) {
      bytes_to_next_corruption_ = skip == UINT64_MAX ? skip : skip - (bytes.size() - at - 1);
      break;
    }
    at += std::size_t(skip) + 1;
  }
  ++counts_.frames_corrupted;
  if (!framed_) return;
  // What the decoder must make of it (PROTOCOL.md §2): it hunts for the sync,
  // checks version and length, then the CRC; the first altered byte decides.
  // After a rejected header it drops one byte and hunts through the rest.
  counts_.expect_discarded_bytes += bytes.size();
  if (first >= 2) pending_sync0_ = false;  // its own sync pair started the header
  hunted(wire, first < 2 ? start : start + 1, wire.size());
  if (first < 2) {
    ++counts_.expect_unseen;
  } else if (first == 2) {
    ++counts_.expect_bad_version;
  } else if (first == 4 || first == 5) {
    const std::size_t length = std::size_t(wire[start + 4]) | (std::size_t(wire[start + 5]) << 8);
    if (length > protocol::frame::kMaxPayload) ++counts_.expect_oversize;
    else ++counts_.expect_bad_crc;
  } else {
    ++counts_.expect_bad_crc;
  }
}

void FaultInjector::pass(const Message& m, std::span<const std::uint8_t> bytes, std::vector<std::uint8_t>& wire) {
  ++counts_.messages;
  const auto* event = std::get_if<protocol::BoardEvent>(&m);
  const bool exempt = event && event->kind == protocol::EventKind::stream_end;
  const auto* block = std::get_if<SampleBlock>(&m);
  if (exempt) {
    wire.insert(wire.end(), bytes.begin(), bytes.end());
    ++counts_.frames_sent;
    pending_sync0_ = false;
    return;
  }
  if (cable_out_) {
    ++counts_.frames_lost_to_pulls;
    lose(m);
    return;
  }
  if (block && stall_pending_) {
    // The board goes silent halfway through this frame, then carries on with
    // the next one: the cut frame is lost, its bytes discarded by the decoder.
    stall_pending_ = false;
    const std::size_t cut = bytes.size() / 2;
    const std::size_t start = wire.size();
    wire.insert(wire.end(), bytes.begin(), bytes.begin() + std::ptrdiff_t(cut));
    pending_sync0_ = false;
    if (framed_) hunted(wire, start + 1, wire.size());
    stall_offset_ = wire.size();
    stall_ready_ = true;
    ++counts_.stalls;
    ++counts_.frames_truncated;
    counts_.expect_discarded_bytes += cut;
    // The next frame's bytes complete the cut header's declared length, so
    // the decoder finds a bad CRC there and rescans.
    if (framed_ && cut >= protocol::frame::kHeaderSize) ++counts_.expect_bad_crc;
    lose(m);
    return;
  }
  std::bernoulli_distribution drop(std::clamp(settings_.drop_frame_rate, 0.0, 1.0));
  if (settings_.drop_frame_rate > 0 && drop(rng_)) {
    ++counts_.frames_dropped;
    lose(m);
  } else {
    const std::uint64_t corrupted_before = counts_.frames_corrupted;
    corrupt_into(bytes, wire);
    if (counts_.frames_corrupted != corrupted_before) {
      lose(m);
    } else {
      ++counts_.frames_sent;
      pending_sync0_ = false;  // whole frame: the decoder takes it without hunting inside
      if (block) {
        if (pending_lost_samples_ > 0) {
          if (session_has_block_) {
            ++counts_.expect_gaps;
            counts_.expect_missing_samples += pending_lost_samples_;
          } else {
            counts_.samples_lost_at_session_edges += pending_lost_samples_;
          }
          pending_lost_samples_ = 0;
        }
        session_has_block_ = true;
      }
    }
  }
  std::bernoulli_distribution burst(std::clamp(settings_.garbage_burst_rate, 0.0, 1.0));
  if (settings_.garbage_burst_rate > 0 && burst(rng_)) garbage(wire);
}

// --- scenario JSON ---------------------------------------------------------

#define ACCRUE_FAULT_NUMBERS(X)                                                                                     \
  X(corrupt_byte_rate) X(drop_frame_rate) X(garbage_burst_rate) X(garbage_burst_max_bytes) X(cable_pull_s)         \
  X(cable_pull_pause_s) X(reboot_at_s) X(reboot_s) X(reboot_zero_window_s) X(clock_skew_ppm) X(stall_at_s)         \
  X(stall_pause_s) X(seed)

nlohmann::json to_json(const FaultSettings& f) {
  nlohmann::json j;
#define X(k) j[#k] = f.k;
  ACCRUE_FAULT_NUMBERS(X)
#undef X
  j["cable_pull_at_s"] = f.cable_pull_at_s;
  return j;
}

std::string apply_json(const nlohmann::json& j, FaultSettings& out) {
  if (!j.is_object()) return "faults must be a JSON object";
  FaultSettings f = out;  // `out` changes only when every key is good
  std::string err;
#define X(k)                                                     \
  if (err.empty() && j.contains(#k)) {                           \
    if (!j[#k].is_number()) err = "faults." #k ": must be a number"; \
    else f.k = j[#k].get<decltype(f.k)>();                       \
  }
  ACCRUE_FAULT_NUMBERS(X)
#undef X
  if (err.empty() && j.contains("cable_pull_at_s")) {
    // One board time, or a list of them.
    const auto& v = j["cable_pull_at_s"];
    f.cable_pull_at_s.clear();
    if (v.is_number()) f.cable_pull_at_s.push_back(v.get<double>());
    else if (v.is_array()) {
      for (const auto& e : v) {
        if (!e.is_number()) return "faults.cable_pull_at_s: must be a number or a list of numbers";
        f.cable_pull_at_s.push_back(e.get<double>());
      }
    } else
      return "faults.cable_pull_at_s: must be a number or a list of numbers";
  }
  if (!err.empty()) return err;
  auto rate = [](double r) { return r >= 0 && r <= 1; };
  if (!rate(f.corrupt_byte_rate)) return "faults.corrupt_byte_rate must be in [0, 1]";
  if (!rate(f.drop_frame_rate)) return "faults.drop_frame_rate must be in [0, 1]";
  if (!rate(f.garbage_burst_rate)) return "faults.garbage_burst_rate must be in [0, 1]";
  if (f.garbage_burst_max_bytes < 1 || f.garbage_burst_max_bytes > 65536)
    return "faults.garbage_burst_max_bytes must be 1..65536";
  if (!(f.cable_pull_s >= 0) || !(f.cable_pull_pause_s >= 0) || !(f.reboot_s >= 0) || !(f.stall_pause_s >= 0) ||
      !(f.reboot_zero_window_s >= 0))
    return "faults: durations must be >= 0";
  if (!(std::fabs(f.clock_skew_ppm) < 1e5)) return "faults.clock_skew_ppm must be within ±1e5";
  out = std::move(f);
  return {};
}

}  // namespace accrue::sim
