#include "daemon/ingest.hpp"

#include <algorithm>
#include <cmath>


namespace accrue::daemon {

using protocol::BoardIdentity;

Ingest::Ingest(const DaemonConfig& config, storage::Writer& writer, Logger& log, Clock clock)
    : config_(config), writer_(writer), log_(log), clock_(std::move(clock)), lines_(config.protocol == ProtocolVariant::text_lines) {
  std::int64_t id = 1;
  if (storage::Status s = writer_.next_run_id(id); s.ok()) next_run_id_ = id;
}

void Ingest::set_resume_point(std::optional<storage::RunInfo> run, std::vector<storage::CheckpointRow> checkpoints) {
  resume_run_ = std::move(run);
  resume_checkpoints_ = std::move(checkpoints);
  for (const auto& c : resume_checkpoints_) carried_[c.channel] = c.state;
}

void Ingest::event(std::string kind, std::string detail, std::optional<std::uint64_t> index, std::optional<int> channel) {
  storage::EventRow e;
  if (run_) e.run_id = run_->run_id;
  e.channel = channel;
  e.sample_index = index;
  e.kind = std::move(kind);
  e.detail = std::move(detail);
  e.host_unix = clock_();
  batch_.events.push_back(std::move(e));
  if (event_listener_) event_listener_(batch_.events.back());
}

void Ingest::on_bytes(std::span<const std::uint8_t> bytes, double receive_unix) {
  messages_.clear();
  if (lines_) line_decoder_.feed(bytes, messages_);
  else decoder_.feed(bytes, messages_);
  for (const auto& m : messages_) handle(m, receive_unix);
}

void Ingest::on_link_lost(const std::string& why) {
  // A pulled cable does not end the run: the board may still be integrating.
  // Whole frames behind a header that can no longer complete still count.
  messages_.clear();
  if (!lines_) decoder_.finish(messages_);
  const double now = clock_();
  for (const auto& m : messages_) handle(m, now);
  decoder_.reset();
  line_decoder_.reset();
  event("link_lost", why);
}

void Ingest::handle(const protocol::Message& m, double receive_unix) {
  if (auto* id = std::get_if<BoardIdentity>(&m)) return on_identity(*id, receive_unix);
  if (auto* b = std::get_if<protocol::SampleBlock>(&m)) return on_block(*b, receive_unix);
  if (auto* e = std::get_if<protocol::BoardEvent>(&m)) return on_event(*e, receive_unix);
  if (auto* a = std::get_if<protocol::CommandAck>(&m); a && on_ack_) on_ack_(*a, receive_unix);
  // Echoed commands are not part of the data path.
}

void Ingest::on_identity(const BoardIdentity& id, double receive_unix) {
  if (identity_ && *identity_ == id) return;  // periodic repeat
  if (identity_) {
    log_.notice("board identity changed: new board session");
    end_run("identity changed");
  }
  identity_ = id;
  (void)receive_unix;
  std::vector<WaitingBlock> waiting;
  waiting.swap(waiting_);
  waiting_samples_ = 0;
  for (const auto& w : waiting) on_block(w.block, w.receive_unix);
}

chain::Calibration Ingest::calibration_for(int channel, const BoardIdentity& id) const {
  chain::Calibration cal;
  cal.adc.bits = id.adc_bits;
  cal.adc.full_scale_v = id.full_scale_v;
  cal.adc.bipolar = id.capabilities & protocol::capability_bit::bipolar_adc;
  cal.front_end.r1_ohm = id.r1_ohm;
  cal.front_end.c_farad = id.c_farad > 0 ? id.c_farad : 1e-9;
  cal.front_end.r2_ohm = id.r2_ohm;
  if (auto it = config_.channels.find(channel); it != config_.channels.end()) {
    const ChannelConfig& c = it->second;
    cal.sensor = c.sensor;
    if (c.c_farad) cal.front_end.c_farad = *c.c_farad;
    if (c.r1_ohm) cal.front_end.r1_ohm = *c.r1_ohm;
    if (c.r2_ohm) cal.front_end.r2_ohm = *c.r2_ohm;
    if (c.gain) cal.adc.gain = *c.gain;
    if (c.zero_code) cal.adc.zero_code = *c.zero_code;
    cal.front_end.inverting = c.inverting;
    cal.sensor_model = c.sensor_model;
  }
  return cal;
}

void Ingest::start_run(const BoardIdentity& id, double receive_unix, std::optional<std::uint64_t> first_index) {
  Run run;
  run.board = id;
  bool resumed = false;
  if (resume_run_ && resume_run_->ended_utc.empty() && resume_run_->board_serial == std::int64_t(id.board_serial) &&
      first_index) {
    // Continue the run the daemon was logging before it stopped, if the board's
    // sample index has moved on from every stored checkpoint.
    resumed = true;
    for (const auto& c : resume_checkpoints_)
      if (c.run_id != resume_run_->run_id || c.last_index >= *first_index) resumed = false;
  }
  if (resumed) {
    run.run_id = resume_run_->run_id;
    ++counters_.runs_resumed;
    log_.notice("resuming run " + std::to_string(run.run_id));
  } else {
    run.run_id = next_run_id_++;
    ++counters_.runs_started;
    storage::RunStart rs;
    rs.run_id = run.run_id;
    rs.board = id;
    rs.started_unix = clock_();
    rs.utc_at_index0 = receive_unix - double(first_index.value_or(0)) * id.sample_period_s;
    batch_.run_start = rs;
    log_.info("run " + std::to_string(run.run_id) + " started: board " + std::to_string(id.board_serial) + ", " +
              std::to_string(id.channel_count) + " channel(s)");
  }
  resume_run_.reset();
  chain::ChainSettings settings;
  settings.sample_period_s = id.sample_period_s;
  settings.settle_s = config_.settle_s;
  settings.end_window = std::size_t(config_.end_window);
  settings.series_interval_s = config_.series_interval_s;
  for (int c = 0; c < id.channel_count; ++c) {
    chain::Calibration cal = calibration_for(c, id);
    if (const std::string why = cal.check(); !why.empty())
      event("calibration_invalid", why, first_index, c);
    chain::ChainSettings settings_c = settings;
    if (auto it = config_.channels.find(c); it != config_.channels.end()) {
      const ChannelConfig& cc = it->second;
      settings_c.leak_correction = cc.leak_correction;
      settings_c.baseline_model = cc.baseline_model;
      settings_c.baseline_robust = cc.baseline_robust;
    }
    if (storage::Status s = writer_.ensure_calibration(c, cal); !s.ok())
      log_.error("channel " + std::to_string(c) + ": cannot record calibration: " + s.message);
    auto chain = std::make_unique<chain::ChannelChain>(cal, settings_c);
    std::optional<chain::ChainState> start_state;
    if (auto it = carried_.find(c); it != carried_.end()) {
      chain::ChainState state = it->second;
      if (!resumed) {
        // A new board session: the total carries on, but the dead time between
        // the sessions cannot be estimated from rates across a reboot.
        state.has_previous_end = false;
        state.last_index = 0;
      }
      chain->resume(state);
      start_state = state;
    }
    // Derivation 1's record of how this chain starts, so the run can be recomputed exactly.
    if (!resumed && batch_.run_start) batch_.run_channels.push_back({c, cal.id, settings_c, start_state});
    run.chains.push_back(std::move(chain));
    storage::ChannelRows rows;
    rows.channel = c;
    rows.run_id = run.run_id;
    rows.calibration_id = cal.id;
    run.rows.push_back(std::move(rows));
  }
  run_ = std::move(run);
  zero_windows_done_.assign(config_.zero_windows.size(), false);
  if (resumed) {
    // What the daemon missed while it was down: the next segment's gap estimate covers it.
    std::uint64_t last = 0;
    for (const auto& c : resume_checkpoints_) last = std::max(last, c.last_index);
    event("run_resumed", "daemon restart; missing_samples=" + std::to_string(*first_index - last - 1) +
                             " estimated from the rates either side", first_index);
  }
}

void Ingest::on_block(const protocol::SampleBlock& b, double receive_unix) {
  if (!identity_) {
    const std::size_t n = std::size_t(b.samples_per_channel) * b.channel_count;
    if (waiting_samples_ + n > kMaxWaitingSamples) {
      counters_.samples_before_identity += b.samples_per_channel;
    } else {
      waiting_samples_ += n;
      waiting_.push_back({b, receive_unix});
    }
    return;
  }
  if (b.channel_count != identity_->channel_count) {
    ++counters_.wrong_shape_blocks;
    return;
  }
  if (!run_) sequence_.restart();
  const protocol::SequenceResult seq = sequence_.on_block(b.first_index, b.samples_per_channel);
  if (run_ && seq.outcome == protocol::SequenceOutcome::reboot) {
    log_.notice("sample index went back from " + std::to_string(run_->next_index) + " to " +
                std::to_string(b.first_index) + ": board rebooted");
    const BoardIdentity same = *identity_;
    end_run("board rebooted");
    identity_ = same;  // same board, new session: its identity still holds
  }
  if (!run_) {
    start_run(*identity_, receive_unix, b.first_index);
    clock_model_.emplace(identity_->sample_period_s);
  }
  Run& run = *run_;
  if (b.samples_per_channel > 0) clock_model_->add(b.first_index + b.samples_per_channel - 1, receive_unix);
  if (seq.outcome == protocol::SequenceOutcome::gap) {
    const std::uint64_t missing = seq.missing_samples;
    ++counters_.gaps;
    counters_.missing_samples += missing;
    event("sample_gap", "missing_samples=" + std::to_string(missing), run.next_index);
    // The chain must not stitch across the gap: a reset may be hidden in it.
    for (std::size_t c = 0; c < run.chains.size(); ++c) run.chains[c]->on_missing_samples(run.rows[c].output);
  }
  run.any_samples = true;
  run.next_index = b.first_index + b.samples_per_channel;
  ++counters_.blocks;
  counters_.samples += std::uint64_t(b.samples_per_channel) * b.channel_count;

  storage::RawBlockRow raw;
  raw.run_id = run.run_id;
  raw.first_index = b.first_index;
  raw.channel_count = b.channel_count;
  raw.status = b.status;
  raw.samples = b.samples_per_channel;
  // Encoded here, so the writer's queue holds the stored bytes (~1.5 B a sample), not 4-byte codes.
  raw.set_codes(b.codes, encode_scratch_);
  batch_.raw.push_back(std::move(raw));

  if (b.samples_per_channel > 0) apply_zero_windows(b.first_index + b.samples_per_channel - 1);
  for (std::size_t c = 0; c < run.chains.size(); ++c) {
    run.chains[c]->process(b.first_index, b.status, b.codes.data() + c, b.samples_per_channel, b.channel_count,
                           run.rows[c].output);
    store_chain_events(run, c);
  }
  if (block_observer_ && b.samples_per_channel > 0) observe_block(b);
}

void Ingest::observe_block(const protocol::SampleBlock& b) {
  const Run& run = *run_;
  BlockObservation& o = observation_;
  o.level_fraction.clear();
  o.full_scale_v.clear();
  o.run_id = run.run_id;
  o.last_index = b.first_index + b.samples_per_channel - 1;
  o.board_time_s = double(o.last_index) * identity_->sample_period_s;
  o.utc = clock_model_->utc_of(o.last_index);
  o.status = b.status;
  o.capabilities = identity_->capabilities;
  for (std::size_t c = 0; c < run.chains.size(); ++c) {
    const chain::AdcCalibration& adc = run.chains[c]->calibration().adc;
    std::int32_t lo = b.codes[c], hi = b.codes[c];
    for (std::size_t i = c; i < b.codes.size(); i += b.channel_count) {
      lo = std::min(lo, b.codes[i]);
      hi = std::max(hi, b.codes[i]);
    }
    const double fs = adc.full_scale_output_v();
    const double peak_v = std::max(std::fabs(adc.to_volts(lo)), std::fabs(adc.to_volts(hi)));
    o.level_fraction.push_back(fs > 0 ? peak_v / fs : 0.0);
    o.full_scale_v.push_back(fs);
  }
  block_observer_(o);
}

void Ingest::apply_zero_windows(std::uint64_t last_index) {
  if (!run_ || !clock_model_ || config_.zero_windows.empty()) return;
  if (zero_windows_done_.size() != config_.zero_windows.size())
    zero_windows_done_.assign(config_.zero_windows.size(), false);
  const double utc_last = clock_model_->utc_of(last_index);
  // UTC -> sample index through the run's clock model (fit offset and skew),
  // taken when the window starts, so the fit is the current one.
  constexpr std::uint64_t span = 1u << 20;
  const double utc_per_sample = (clock_model_->utc_of(last_index + span) - utc_last) / double(span);
  if (!(utc_per_sample > 0)) return;
  for (std::size_t i = 0; i < config_.zero_windows.size(); ++i) {
    const ZeroWindow& w = config_.zero_windows[i];
    if (zero_windows_done_[i] || utc_last < w.from_unix) continue;
    zero_windows_done_[i] = true;
    const double from = double(last_index) + (w.from_unix - utc_last) / utc_per_sample;
    const double to = double(last_index) + (w.to_unix - utc_last) / utc_per_sample;
    if (to < 0) continue;  // before this run's first sample
    const std::uint64_t from_i = from <= 0 ? 0 : std::uint64_t(std::ceil(from));
    const std::uint64_t to_i = std::uint64_t(std::floor(to));
    if (to_i < from_i) continue;
    std::vector<std::optional<int>> targets;
    if (w.channels.empty()) targets.push_back(std::nullopt);
    for (int ch : w.channels)
      if (std::size_t(ch) < run_->chains.size()) targets.push_back(ch);
    for (const std::optional<int>& ch : targets) {
      const std::optional<std::uint64_t> used = mark_quiet(ch, from_i, to_i);
      if (!used) continue;  // wholly behind the chains (a window from before this run)
      // Recorded like a quiet window marked through the API, so plots and reprocessing see it alike.
      const nlohmann::json detail = {{"from_index", from_i}, {"to_index", to_i},
                                     {"note", "config zero_windows[" + std::to_string(i) + "]"},
                                     {"baseline_from_index", *used}};
      event("quiet_window", detail.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace), from_i, ch);
    }
  }
}

void Ingest::store_chain_events(Run& run, std::size_t c) {
  // Chain events (saturation, a rejected baseline, ...) become stored events;
  // the chain's own list is emptied.
  auto& events = run.rows[c].output.events;
  for (auto& e : events) event(e.kind, std::move(e.detail), e.sample_index, int(c));
  events.clear();
}

void Ingest::on_event(const protocol::BoardEvent& e, double receive_unix) {
  (void)receive_unix;
  ++counters_.board_events;
  static constexpr const char* names[] = {"",      "reset_begin",       "reset_end",         "overload",
                                          "board_fault", "zero_relay_closed", "zero_relay_opened", "stream_end"};
  const std::optional<int> channel = e.channel == 0xFF ? std::nullopt : std::optional<int>(e.channel);
  event(std::string("board_") + names[int(e.kind)], "value=" + std::to_string(e.value), e.sample_index, channel);
  if (e.kind == protocol::EventKind::stream_end) end_run("stream ended");
}

void Ingest::end_run(const std::string& reason) {
  if (!run_) return;
  Run& run = *run_;
  for (std::size_t c = 0; c < run.chains.size(); ++c) {
    run.chains[c]->finish(run.rows[c].output);
    store_chain_events(run, c);  // closing a zero window at the end can raise one too
    carried_[int(c)] = run.chains[c]->snapshot().state;
  }
  storage::RunEnd end;
  end.run_id = run.run_id;
  end.reason = reason;
  end.ended_unix = clock_();
  batch_.run_end = end;
  log_.info("run " + std::to_string(run.run_id) + " ended: " + reason);
  flush();
  run_.reset();
  if (reason != "identity changed" && reason != "calibration changed") identity_.reset();
}

void Ingest::reconfigure(const DaemonConfig& config) {
  const bool calibrations_changed = config.channels != config_.channels;
  // Changed zero windows are all looked at again (those already behind the chains change nothing).
  if (config.zero_windows != config_.zero_windows) zero_windows_done_.assign(config.zero_windows.size(), false);
  config_.channels = config.channels;
  config_.reset_schedule = config.reset_schedule;
  config_.zero_windows = config.zero_windows;
  event("config_reloaded", calibrations_changed ? "calibrations changed" : "calibrations unchanged");
  if (calibrations_changed && run_) end_run("calibration changed");
}

std::optional<std::uint64_t> Ingest::mark_quiet(std::optional<int> channel, std::uint64_t from_index,
                                                std::uint64_t to_index) {
  if (!run_) return std::nullopt;
  std::optional<std::uint64_t> used;
  for (std::size_t c = 0; c < run_->chains.size(); ++c) {
    if (channel && std::size_t(*channel) != c) continue;
    if (auto from = run_->chains[c]->add_quiet_window({from_index, to_index}))
      used = used ? std::min(*used, *from) : *from;
  }
  return used;
}

void Ingest::flush() {
  if (run_) {
    for (std::size_t c = 0; c < run_->chains.size(); ++c) {
      storage::ChannelRows rows = std::move(run_->rows[c]);
      run_->rows[c].output = {};
      rows.checkpoint = run_->chains[c]->snapshot();
      batch_.channels.push_back(std::move(rows));
    }
  }
  if (batch_.empty()) return;
  writer_.submit(std::move(batch_));
  batch_ = storage::Batch{};
}

nlohmann::json Ingest::status() const {
  using nlohmann::json;
  const auto& d = decoder_.counters();
  json j = {
      {"decoder",
       {{"bytes_in", d.bytes_in}, {"frames_ok", d.frames_ok}, {"discarded_bytes", d.discarded_bytes},
        {"bad_crc", d.bad_crc}, {"oversize", d.oversize}, {"accepted_bytes", d.accepted_bytes}, {"bad_version", d.bad_version}, {"malformed", d.malformed},
        {"truncated", d.truncated}}},
      {"ingest",
       {{"blocks", counters_.blocks}, {"samples", counters_.samples},
        {"samples_before_identity", counters_.samples_before_identity}, {"gaps", counters_.gaps},
        {"missing_samples", counters_.missing_samples}, {"runs_started", counters_.runs_started},
        {"runs_resumed", counters_.runs_resumed}, {"board_events", counters_.board_events},
        {"wrong_shape_blocks", counters_.wrong_shape_blocks}}},
  };
  if (lines_) {
    const auto& l = line_decoder_.counters();
    j["line_decoder"] = {{"bytes_in", l.bytes_in},           {"lines_ok", l.lines_ok},
                         {"comments", l.comments},           {"bad_lines", l.bad_lines},
                         {"bad_checksum", l.bad_checksum},   {"oversize_lines", l.oversize_lines},
                         {"accepted_bytes", l.accepted_bytes}, {"discarded_bytes", l.discarded_bytes}};
  }
  j["wire_format"] = lines_ ? "lines" : "frames";
  j["ingest"]["reboots"] = sequence_.counters().reboots;
  if (clock_model_) {
    const ClockFit f = clock_model_->fit();
    j["clock"] = {{"valid", f.valid}, {"skew_ppm", f.skew_ppm}, {"buckets", f.buckets}, {"pairs", f.pairs}};
    if (run_) j["clock"]["utc_of_next_index"] = clock_model_->utc_of(run_->next_index);
  }
  if (identity_) {
    j["board"] = {{"serial", identity_->board_serial},         {"firmware_version", identity_->firmware_version},
                  {"channels", identity_->channel_count},      {"adc_bits", identity_->adc_bits},
                  {"full_scale_v", identity_->full_scale_v},   {"sample_period_s", identity_->sample_period_s},
                  {"capabilities", identity_->capabilities}};
  }
  if (run_) {
    json channels = json::array();
    for (std::size_t c = 0; c < run_->chains.size(); ++c) {
      const auto t = run_->chains[c]->snapshot();
      const auto& cal = run_->chains[c]->calibration();
      channels.push_back({{"channel", c}, {"quantity", cal.quantity_name()}, {"unit", cal.unit()},
                          {"total", t.total}, {"std_uncertainty", t.std_uncertainty}, {"segments", t.segments},
                          {"last_index", t.last_index}, {"flags", t.flags}});
    }
    j["run"] = {{"run_id", run_->run_id}, {"next_index", run_->next_index}, {"channels", channels}};
  } else {
    j["run"] = nullptr;
  }
  return j;
}

}  // namespace accrue::daemon
