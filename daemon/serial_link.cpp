#include "daemon/serial_link.hpp"

#include <algorithm>
#include <array>
#include <cstdio>

#include "daemon/port_finder.hpp"

namespace accrue::daemon {

const char* to_string(LinkState s) {
  switch (s) {
    case LinkState::connecting: return "connecting";
    case LinkState::up: return "up";
    case LinkState::retrying: return "retrying";
    case LinkState::stopped: return "stopped";
  }
  return "?";
}

SerialLink::SerialLink(asio::io_context& io, LinkSettings settings, Logger& log, Clock clock, BytesHandler on_bytes,
                       UpHandler on_up, DownHandler on_down)
    : io_(io),
      settings_(std::move(settings)),
      log_(log),
      clock_(std::move(clock)),
      on_bytes_(std::move(on_bytes)),
      on_up_(std::move(on_up)),
      on_down_(std::move(on_down)),
      port_(io),
      backoff_timer_(io) {}

void SerialLink::set_state(LinkState s) {
  if (s != state_) state_since_unix_ = clock_();
  state_ = s;
}

nlohmann::json SerialLink::status() const {
  nlohmann::json j = {{"state", to_string(state_)},
                      {"state_since_unix", state_since_unix_},
                      {"device", device_path_},
                      {"selector", settings_.selector},
                      {"baud", settings_.baud},
                      {"parity", settings_.parity},
                      {"flow_control", settings_.flow_control},
                      {"last_error", last_error_},
                      {"opens", opens_},
                      {"failed_opens", failed_opens_},
                      {"drops", drops_},
                      {"unsent_commands", unsent_},
                      {"backoff_s", state_ == LinkState::retrying ? backoff_s_ : 0.0}};
  for (const auto& p : list_ports()) {
    if (p.path != device_path_) continue;
    if (p.usb_vid >= 0) {
      char id[16];
      std::snprintf(id, sizeof id, "%04x:%04x", unsigned(p.usb_vid), unsigned(p.usb_pid));
      j["usb_id"] = id;
    }
    if (!p.usb_serial.empty()) j["usb_serial"] = p.usb_serial;
    if (!p.description.empty()) j["description"] = p.description;
  }
  return j;
}

void SerialLink::start() { asio::co_spawn(io_, run(), asio::detached); }

void SerialLink::stop() {
  stopping_ = true;
  set_state(LinkState::stopped);
  boost::system::error_code ec;
  backoff_timer_.cancel();
  port_.close(ec);
}

bool SerialLink::open_port() {
  std::string why;
  auto path = resolve_port(settings_.selector, why);
  if (!path) {
    last_error_ = why;
    return false;
  }
  device_path_ = *path;
  boost::system::error_code ec;
  port_.open(device_path_, ec);
  if (ec) {
    last_error_ = "cannot open " + device_path_ + ": " + ec.message();
    return false;
  }
  using base = asio::serial_port_base;
  port_.set_option(base::baud_rate(settings_.baud), ec);
  if (!ec) port_.set_option(base::character_size(8), ec);
  const auto parity = settings_.parity == "odd"    ? base::parity::odd
                      : settings_.parity == "even" ? base::parity::even
                                                   : base::parity::none;
  const auto flow = settings_.flow_control == "software"   ? base::flow_control::software
                    : settings_.flow_control == "hardware" ? base::flow_control::hardware
                                                           : base::flow_control::none;
  if (!ec) port_.set_option(base::parity(parity), ec);
  if (!ec) port_.set_option(base::stop_bits(base::stop_bits::one), ec);
  if (!ec) port_.set_option(base::flow_control(flow), ec);
  if (ec) {
    last_error_ = "cannot configure " + device_path_ + ": " + ec.message();
    port_.close(ec);
    return false;
  }
  return true;
}

asio::awaitable<void> SerialLink::run() {
  double backoff_s = 0.1;
  std::array<std::uint8_t, 65536> buffer;
  while (!stopping_) {
    set_state(LinkState::connecting);
    if (open_port()) {
      ++opens_;
      set_state(LinkState::up);
      backoff_s = 0.1;
      log_.info("link up on " + device_path_);
      on_up_();
      for (;;) {
        boost::system::error_code ec;
        const std::size_t n =
            co_await port_.async_read_some(asio::buffer(buffer), asio::redirect_error(asio::use_awaitable, ec));
        if (n > 0) on_bytes_(std::span<const std::uint8_t>(buffer.data(), n), clock_());
        if (ec) {
          last_error_ = ec == asio::error::eof ? "end of file (device closed)" : ec.message();
          break;
        }
      }
      boost::system::error_code ignored;
      port_.close(ignored);
      if (stopping_) break;
      ++drops_;
      outbox_.clear();
      log_.warning("link down on " + device_path_ + ": " + last_error_);
      on_down_(last_error_);
    } else if (!stopping_) {
      ++failed_opens_;
      log_.debug("link not open: " + last_error_);
    }
    if (stopping_) break;
    backoff_s_ = backoff_s;
    set_state(LinkState::retrying);
    backoff_timer_.expires_after(std::chrono::duration_cast<std::chrono::steady_clock::duration>(
        std::chrono::duration<double>(backoff_s)));
    boost::system::error_code ec;
    co_await backoff_timer_.async_wait(asio::redirect_error(asio::use_awaitable, ec));
    backoff_s = std::min(backoff_s * 2.0, settings_.reconnect_max_s);
  }
  set_state(LinkState::stopped);
}

void SerialLink::send(std::vector<std::uint8_t> bytes) {
  if (state_ != LinkState::up) {
    ++unsent_;
    return;
  }
  outbox_.push_back(std::move(bytes));
  if (!writing_) asio::co_spawn(io_, write_queued(), asio::detached);
}

asio::awaitable<void> SerialLink::write_queued() {
  writing_ = true;
  while (!outbox_.empty() && state_ == LinkState::up) {
    std::vector<std::uint8_t> bytes = std::move(outbox_.front());
    outbox_.pop_front();
    boost::system::error_code ec;
    co_await asio::async_write(port_, asio::buffer(bytes), asio::redirect_error(asio::use_awaitable, ec));
    if (ec) {
      ++unsent_;
      break;  // the reader sees the same fault and reopens
    }
  }
  writing_ = false;
}

}  // namespace accrue::daemon
