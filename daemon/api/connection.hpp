#pragma once
// Connection serves one client on one stream socket (Unix or TCP): it reads
// newline-delimited requests of at most max_request_bytes, hands each to
// Methods, and queues the reply. Writing runs as its own coroutine from a
// queue, so nothing the daemon does ever waits on this client:
// - replies: the reader stops reading new requests while more than
//   max_queued_bytes wait to be written (back-pressure on that client only);
// - notifications: if the queue is over max_queued_bytes, the client is cut
//   off: the queue is dropped, one "cut_off" error notification is queued
//   and the socket closed after it is written or after a 10 s grace.
// An oversize line gets an Invalid Request error and is skipped; the
// connection carries on. A client idle too long, or one that leaves a request
// line unfinished too long (ClientDeadline), gets one "closed" notification
// (best effort, never waited for) and is closed at once. A reply Methods gives
// later (a board command waiting for its ack) is queued when it comes; a
// client that stops sending is still given the replies it awaits, within the
// same 10 s grace. Owned by shared_ptr from its coroutines and from pending
// replies' callbacks; the Hub holds it weakly. Asio thread only.
#include <sys/socket.h>

#include <cstdio>
#include <cstring>
#include <deque>
#include <functional>
#include <memory>
#include <string>

#include "daemon/api/client_deadline.hpp"
#include "daemon/api/methods.hpp"
#include "daemon/api/sink.hpp"
#include "daemon/asio.hpp"

namespace accrue::daemon::api {

struct ConnectionLimits {
  std::size_t max_request_bytes = 64 * 1024;
  std::size_t max_queued_bytes = 4u << 20;
  ClientTimeouts timeouts;
};

// Why a connection ended, for the server's counters.
enum class CloseReason { ended, cut_off, idle, unfinished_line };

// Everything a connection needs from the server besides its socket.
struct ConnectionHooks {
  std::function<void(const Sink*, CloseReason)> done;
  std::function<bool(const Sink*)> listening;                 // holds a subscription: never idle
  std::function<std::chrono::steady_clock::time_point()> now;  // the clock the deadlines read
};

template <typename Socket>
class Connection : public Sink, public std::enable_shared_from_this<Connection<Socket>> {
 public:
  Connection(Socket socket, ConnectionLimits limits, Methods& methods, bool needs_token, ConnectionHooks hooks)
      : socket_(std::move(socket)),
        limits_(limits),
        methods_(methods),
        hooks_(std::move(hooks)),
        deadline_(limits_.timeouts, hooks_.now()),
        drained_(socket_.get_executor()),
        grace_(socket_.get_executor()),
        watchdog_(socket_.get_executor()) {
    peer_.authenticated = !needs_token;
  }

  void start() {
    peer_.sink = this->weak_from_this();
    peer_.sink_ptr = this;
    asio::co_spawn(socket_.get_executor(), read_loop(this->shared_from_this()), asio::detached);
    arm_watchdog();
  }

  bool notify(std::string line) override {
    if (closing_) return false;
    if (queued_bytes_ + line.size() > limits_.max_queued_bytes) {
      cut_off("outgoing buffer over " + std::to_string(limits_.max_queued_bytes) + " bytes: the client is not reading");
      return false;
    }
    enqueue(std::move(line));
    return true;
  }
  bool open() const override { return !closing_; }

 private:
  void enqueue(std::string line) {
    line.push_back('\n');
    queued_bytes_ += line.size();
    out_.push_back(std::move(line));
    if (!writing_) {
      writing_ = true;
      asio::co_spawn(socket_.get_executor(), write_loop(this->shared_from_this()), asio::detached);
    }
  }

  void cut_off(const std::string& why) {
    if (closing_) return;
    was_cut_off_ = true;
    out_.clear();
    queued_bytes_ = 0;
    enqueue(nlohmann::json{{"jsonrpc", "2.0"},
                           {"method", "cut_off"},
                           {"params", {{"code", rpc_error::cut_off}, {"message", why}}}}
                .dump());
    closing_ = true;
    grace_.expires_after(std::chrono::seconds(10));
    grace_.async_wait([self = this->shared_from_this()](const boost::system::error_code& ec) {
      if (!ec) self->close();
    });
    drained_.cancel();
  }

  // A request's reply, at once or later (a board command's). After the end
  // (closed, cut off) it is dropped; a client that stopped sending still gets
  // it, and the connection closes once nothing more is awaited or written.
  void answered(std::optional<std::string> reply) {
    --awaiting_;
    if (finished_ || was_cut_off_) return;
    if (reply) enqueue(std::move(*reply));
    else if (closing_ && awaiting_ == 0 && !writing_) close();
  }

  bool listening() const { return hooks_.listening && hooks_.listening(this); }

  // Sleeps until the deadline could next be passed; activity in between only
  // moves the deadline, so the timer is re-armed lazily when it fires.
  void arm_watchdog() {
    const auto now = hooks_.now();
    watchdog_.expires_after(deadline_.next_check(now, listening()) - now);
    watchdog_.async_wait([self = this->shared_from_this()](const boost::system::error_code& ec) {
      if (ec || self->finished_ || self->closing_) return;  // closing: the grace timer ends it
      const auto verdict = self->deadline_.check(self->hooks_.now(), self->listening());
      if (verdict == ClientDeadline::Verdict::keep) {
        self->arm_watchdog();
      } else {
        self->timed_out(verdict);
      }
    });
  }

  void timed_out(ClientDeadline::Verdict verdict) {
    const bool idle = verdict == ClientDeadline::Verdict::idle;
    const auto seconds = std::chrono::duration<double>(idle ? limits_.timeouts.idle : limits_.timeouts.line).count();
    close_reason_ = idle ? CloseReason::idle : CloseReason::unfinished_line;
    // One line, only if nothing else is being written, without waiting: a
    // client that is not reading must not hold the slot any longer.
    if (!writing_) {
      char amount[32];
      std::snprintf(amount, sizeof amount, "%g", seconds);
      const std::string line =
          nlohmann::json{{"jsonrpc", "2.0"},
                         {"method", "closed"},
                         {"params",
                          {{"code", rpc_error::timed_out},
                           {"message", idle ? std::string("idle for ") + amount + " s"
                                            : std::string("request line not finished within ") + amount + " s"}}}}
              .dump() +
          "\n";
      [[maybe_unused]] const auto sent =
          ::send(socket_.native_handle(), line.data(), line.size(), MSG_DONTWAIT | MSG_NOSIGNAL);
    }
    closing_ = true;
    close();
  }

  void close() {
    // Before anything wakes: a reader paused for back-pressure must see the end, or it
    // re-arms its 24 h wait and keeps the connection, queue and all, alive that long.
    closing_ = true;
    boost::system::error_code ec;
    socket_.shutdown(asio::socket_base::shutdown_both, ec);
    socket_.close(ec);
    grace_.cancel();
    drained_.cancel();
    watchdog_.cancel();
    if (!finished_) {
      finished_ = true;
      hooks_.done(this, was_cut_off_ ? CloseReason::cut_off : close_reason_);
      // Nothing is written any more: give back the queue's memory now, not when the last coroutine lets go.
      // (Also what wakes a paused reader for good: its loop waits while queued_bytes_ is over the limit.)
      std::deque<std::string>().swap(out_);
      queued_bytes_ = 0;
    }
  }

  static asio::awaitable<void> write_loop(std::shared_ptr<Connection> self) {
    boost::system::error_code ec;
    while (!self->out_.empty()) {
      std::string line = std::move(self->out_.front());
      self->out_.pop_front();
      co_await asio::async_write(self->socket_, asio::buffer(line), asio::redirect_error(asio::use_awaitable, ec));
      self->queued_bytes_ -= std::min(self->queued_bytes_, line.size());
      if (ec) break;
      self->deadline_.wrote(self->hooks_.now());
      if (self->queued_bytes_ <= self->limits_.max_queued_bytes / 2) self->drained_.cancel();
    }
    self->writing_ = false;
    if (ec || (self->closing_ && (self->awaiting_ == 0 || self->was_cut_off_))) self->close();
  }

  static asio::awaitable<void> read_loop(std::shared_ptr<Connection> self) {
    boost::system::error_code ec;
    std::string line;
    bool discarding = false;  // inside an oversize line: drop until its newline
    std::array<char, 8192> chunk;
    while (!self->closing_) {
      const std::size_t n =
          co_await self->socket_.async_read_some(asio::buffer(chunk), asio::redirect_error(asio::use_awaitable, ec));
      if (ec) break;
      bool ended_a_line = false;
      std::size_t at = 0;
      while (at < n && !self->closing_) {
        const char* begin = chunk.data() + at;
        const char* nl = static_cast<const char*>(std::memchr(begin, '\n', n - at));
        const std::size_t take = nl ? std::size_t(nl - begin) : n - at;
        at += take + (nl ? 1 : 0);
        if (!discarding) {
          if (line.size() + take > self->limits_.max_request_bytes) {
            discarding = true;
            std::string().swap(line);
          } else {
            line.append(begin, take);
          }
        }
        if (!nl) continue;
        ended_a_line = true;
        if (discarding) {
          discarding = false;
          self->enqueue(error_reply(nullptr, rpc_error::invalid_request,
                                    "Invalid Request: line longer than " + std::to_string(self->limits_.max_request_bytes) +
                                        " bytes")
                            .dump());
        } else {
          if (!line.empty() && line.back() == '\r') line.pop_back();
          if (line.find_first_not_of(" \t") != std::string::npos) {
            ++self->awaiting_;
            self->methods_.handle_line(line, self->peer_,
                                       [self](std::optional<std::string> r) { self->answered(std::move(r)); });
            if (self->peer_.close_after_reply) {
              self->closing_ = true;
              if (!self->writing_) self->close();
            }
          }
          line.clear();
          // A large request grew the buffer: give it back rather than hold it for the connection's life.
          if (line.capacity() > 16384) std::string().swap(line);
        }
        // Back-pressure: a client that does not read its replies stops being read.
        if (!self->closing_ && self->queued_bytes_ > self->limits_.max_queued_bytes) {
          self->deadline_.pause_reading(self->hooks_.now());
          while (!self->closing_ && self->queued_bytes_ > self->limits_.max_queued_bytes) {
            self->drained_.expires_after(std::chrono::hours(24));
            co_await self->drained_.async_wait(asio::redirect_error(asio::use_awaitable, ec));
            ec = {};
          }
          self->deadline_.resume_reading(self->hooks_.now());
        }
      }
      self->deadline_.received(self->hooks_.now(), ended_a_line, discarding || !line.empty());
    }
    // Done with reading: a line buffer grown by a large request goes back now.
    std::string().swap(line);
    // The peer stopped sending: finish writing what it asked for, within a grace.
    self->closing_ = true;
    if (!self->writing_ && self->awaiting_ == 0) {
      self->close();
    } else if (!self->was_cut_off_) {
      self->grace_.expires_after(std::chrono::seconds(10));
      self->grace_.async_wait([self](const boost::system::error_code& e) {
        if (!e) self->close();
      });
    }
  }

  Socket socket_;
  ConnectionLimits limits_;
  Methods& methods_;
  ConnectionHooks hooks_;
  ClientDeadline deadline_;
  Peer peer_;
  asio::steady_timer drained_;
  asio::steady_timer grace_;
  asio::steady_timer watchdog_;
  std::deque<std::string> out_;
  std::size_t queued_bytes_ = 0;
  std::size_t awaiting_ = 0;  // requests handed to Methods and not yet answered
  bool writing_ = false;
  bool closing_ = false;
  bool finished_ = false;
  bool was_cut_off_ = false;
  CloseReason close_reason_ = CloseReason::ended;
};

}  // namespace accrue::daemon::api
