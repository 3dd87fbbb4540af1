#include "daemon/serial_link.hpp"

#include <algorithm>
#include <array>

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

void SerialLink::start() { asio::co_spawn(io_, run(), asio::detached); }

void SerialLink::stop() {
  stopping_ = true;
  state_ = LinkState::stopped;
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
  if (!ec) port_.set_option(base::parity(base::parity::none), ec);
  if (!ec) port_.set_option(base::stop_bits(base::stop_bits::one), ec);
  if (!ec) port_.set_option(base::flow_control(base::flow_control::none), ec);
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
    state_ = LinkState::connecting;
    if (open_port()) {
      ++opens_;
      state_ = LinkState::up;
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
      log_.debug("link not open: " + last_error_);
    }
    if (stopping_) break;
    state_ = LinkState::retrying;
    backoff_timer_.expires_after(std::chrono::duration_cast<std::chrono::steady_clock::duration>(
        std::chrono::duration<double>(backoff_s)));
    boost::system::error_code ec;
    co_await backoff_timer_.async_wait(asio::redirect_error(asio::use_awaitable, ec));
    backoff_s = std::min(backoff_s * 2.0, settings_.reconnect_max_s);
  }
  state_ = LinkState::stopped;
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
