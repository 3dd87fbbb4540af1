// accrued: the accrue measurement and logging daemon.
#include <unistd.h>

#include <chrono>
#include <cctype>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <iostream>
#include <optional>
#include <string>
#include <thread>

#include "daemon/api/hub.hpp"
#include "daemon/reprocess_jobs.hpp"
#include "daemon/api/link_control.hpp"
#include "daemon/api/methods.hpp"
#include "daemon/api/server.hpp"
#include "daemon/asio.hpp"
#include "daemon/board_commands.hpp"
#include "daemon/capture.hpp"
#include "daemon/ingest.hpp"
#include "daemon/options.hpp"
#include "daemon/port_finder.hpp"
#include "daemon/reload.hpp"
#include "daemon/reset_driver.hpp"
#include "daemon/serial_link.hpp"
#include "daemon/service.hpp"
#include "daemon/stop_deadline.hpp"
#include "protocol/encoder.hpp"
#include "protocol/line_codec.hpp"
#include "storage/migrations.hpp"
#include "storage/reader.hpp"
#include "storage/utc.hpp"
#include "storage/writer.hpp"

namespace {

using namespace accrue;
using namespace accrue::daemon;

constexpr const char* kUsage = R"(usage: accrued [options]

Reads an integrator board over serial, removes drift, stitches resets into one
continuous total, stores it in SQLite and answers JSON-RPC 2.0 on a Unix socket.

options:
  --config FILE        JSON config (comments allowed); flags below override it
  --device SELECTOR    /dev/ttyUSB0, a pseudo-terminal path, usb-serial:SERIAL
                       or usb-id:VVVV:PPPP
  --baud N             serial speed (default 921600)
  --database FILE      SQLite file (default accrue.db)
  --socket PATH        JSON-RPC Unix socket (default accrued.sock)
  --log-level LEVEL    error, warning, notice, info (default), debug
  --record FILE        also write every byte read, with its receive time, to a capture FILE
  --replay FILE        feed a capture through the full daemon path into --database,
                       as fast as it goes, then exit (no device, no socket)
  --check-config FILE  validate FILE, print every error (key, value, reason),
                       exit 0 if valid and 2 if not
  --list-ports         list serial ports with their USB ids and exit
  --help               this text
  --version            print the version
  --test-hang-on-sigusr2
                       for tests only: SIGUSR2 blocks the event loop, so the
                       watchdog keep-alives stop

signals: SIGTERM/SIGINT commit everything accepted and exit; SIGHUP reloads
calibrations, reset schedule, zero windows and log level from --config, and
keeps the running config if the new file has any error.
)";

double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

void print_errors(const std::vector<ConfigError>& errors) {
  for (const auto& e : errors) std::fprintf(stderr, "accrued: config: %s\n", to_string(e).c_str());
}

// Command-line settings; kept so a SIGHUP reload re-applies them over the new file.
struct Flags {
  std::optional<std::string> config_file, device, database, socket, record, replay;
  std::optional<int> baud;
  std::optional<LogLevel> log_level;
  bool hang_on_sigusr2 = false;  // test-only: SIGUSR2 blocks the loop, to exercise the watchdog

  void apply(DaemonConfig& c) const {
    if (device) c.device = *device;
    if (baud) c.baud = *baud;
    if (database) c.database = *database;
    if (socket) c.socket_path = *socket;
    if (log_level) c.log_level = *log_level;
    if (record) c.record_path = *record;
    if (replay) c.replay_path = *replay;
  }
};

// Defaults, then the file, then the flags; every error of the file and of the whole.
std::vector<ConfigError> build_config(const Flags& flags, DaemonConfig& out) {
  DaemonConfig c;
  std::vector<ConfigError> errors;
  if (flags.config_file) errors = load_config(*flags.config_file, c);
  flags.apply(c);
  if (errors.empty()) errors = validate(c);
  out = c;
  return errors;
}

std::string join(const std::vector<std::string>& v) {
  std::string s;
  for (const auto& x : v) s += (s.empty() ? "" : ", ") + x;
  return s;
}

}  // namespace

int main(int argc, char** argv) {
  Flags flags;
  std::vector<std::string> args(argv + 1, argv + argc);
  for (std::size_t i = 0; i < args.size(); ++i) {
    const std::string& a = args[i];
    auto value = [&](const char* name) -> const std::string* {
      if (i + 1 >= args.size()) {
        std::fprintf(stderr, "accrued: %s needs a value\n", name);
        return nullptr;
      }
      return &args[++i];
    };
    if (a == "--help" || a == "-h") {
      std::fputs(kUsage, stdout);
      return 0;
    } else if (a == "--version") {
      std::puts("accrued 0.1.0");
      return 0;
    } else if (a == "--list-ports") {
      for (const auto& p : list_ports()) {
        std::printf("%s\t%s", p.path.c_str(), p.description.c_str());
        if (p.usb_vid >= 0) std::printf("\tusb-id:%04x:%04x", p.usb_vid, p.usb_pid);
        if (!p.usb_serial.empty()) std::printf("\tusb-serial:%s", p.usb_serial.c_str());
        std::printf("\n");
      }
      return 0;
    } else if (a == "--check-config") {
      const std::string* f = value("--check-config");
      if (!f) return 2;
      DaemonConfig checked;
      auto errors = load_config(*f, checked);
      if (errors.empty()) errors = validate(checked);
      print_errors(errors);
      if (!errors.empty()) return 2;
      std::printf("%s: valid\n", f->c_str());
      return 0;
    } else if (a == "--config") {
      const std::string* v = value("--config");
      if (!v) return 2;
      flags.config_file = *v;
    } else if (a == "--device") {
      const std::string* v = value("--device");
      if (!v) return 2;
      flags.device = *v;
    } else if (a == "--baud") {
      const std::string* v = value("--baud");
      if (!v) return 2;
      char* end = nullptr;
      const long b = std::strtol(v->c_str(), &end, 10);
      if (*end != '\0' || b < 50 || b > 12'000'000) {
        std::fprintf(stderr, "accrued: --baud: must be a whole number from 50 to 12000000, got %s\n", v->c_str());
        return 2;
      }
      flags.baud = int(b);
    } else if (a == "--database") {
      const std::string* v = value("--database");
      if (!v) return 2;
      flags.database = *v;
    } else if (a == "--socket") {
      const std::string* v = value("--socket");
      if (!v) return 2;
      flags.socket = *v;
    } else if (a == "--record") {
      const std::string* v = value("--record");
      if (!v) return 2;
      flags.record = *v;
    } else if (a == "--replay") {
      const std::string* v = value("--replay");
      if (!v) return 2;
      flags.replay = *v;
    } else if (a == "--log-level") {
      const std::string* v = value("--log-level");
      if (!v) return 2;
      LogLevel level{};
      if (!parse_log_level(*v, level)) {
        std::fprintf(stderr, "accrued: --log-level: unknown level %s\n", v->c_str());
        return 2;
      }
      flags.log_level = level;
    } else if (a == "--test-hang-on-sigusr2") {
      flags.hang_on_sigusr2 = true;
    } else {
      std::fprintf(stderr, "accrued: unknown option %s (see --help)\n", a.c_str());
      return 2;
    }
  }
  DaemonConfig config;
  if (auto errors = build_config(flags, config); !errors.empty()) {
    print_errors(errors);
    std::fprintf(stderr, "accrued: refusing to start: %zu config error(s)\n", errors.size());
    return 2;
  }

  Logger log = Logger::for_environment(config.log_level);
  ServiceNotifier notifier;

  storage::WriterSettings writer_settings;
  writer_settings.commit_interval = std::chrono::milliseconds(config.commit_interval_ms);
  writer_settings.soft_limit_bytes = std::size_t(config.writer_queue_soft_limit_mib * double(1u << 20));
  writer_settings.hard_limit_bytes = std::size_t(config.writer_queue_hard_limit_mib * double(1u << 20));
  std::unique_ptr<storage::Writer> writer;
  // Writer::open migrates a store of an older build; on a large file that
  // copies every raw block, which can take minutes, so say so before it starts.
  if (int stored = 0; storage::stored_schema_version(config.database, stored).ok() && stored > 0 &&
                      stored < storage::kSchemaVersion)
    log.info("store " + config.database + " has schema version " + std::to_string(stored) + ": migrating to " +
             std::to_string(storage::kSchemaVersion) + " (a large file takes a while; it is one transaction)");
  if (storage::Status s = storage::Writer::open(config.database, writer_settings, unix_now, writer); !s.ok()) {
    log.error("cannot open the store: " + s.message);
    return 1;
  }
  Ingest ingest(config, *writer, log, unix_now);
  {
    std::unique_ptr<storage::Reader> reader;
    std::optional<storage::RunInfo> run;
    std::vector<storage::CheckpointRow> checkpoints;
    storage::Status s = storage::Reader::open(config.database, reader);
    if (s.ok()) s = reader->latest_run(run);
    if (s.ok()) s = reader->checkpoints(checkpoints);
    if (!s.ok()) {
      log.error("cannot read the last checkpoint: " + s.message);
      return 1;
    }
    ingest.set_resume_point(run, checkpoints);
  }
  // Storage trouble (failing writes, the file deleted or replaced) goes to the log as it happens.
  writer->set_notice_sink([&log](bool is_error, const std::string& message) {
    if (is_error) log.error(message);
    else log.notice(message);
  });
  writer->start();

  if (!config.replay_path.empty()) {
    std::uint64_t records = 0;
    const ReplayResult r = read_capture(config.replay_path, [&](std::span<const std::uint8_t> bytes, double t) {
      ingest.on_bytes(bytes, t);
      if (++records % 256 == 0) ingest.flush();
    });
    ingest.flush();
    writer->stop();
    if (!r.ok) {
      log.error(r.error);
      return 1;
    }
    if (r.truncated_tail) log.warning("the capture's last record was cut short; replayed everything before it");
    const auto w = writer->counters();
    log.info("replayed " + std::to_string(r.records) + " records, " + std::to_string(r.bytes) + " bytes; " +
             std::to_string(ingest.counters().samples) + " samples into " + config.database);
    return w.last_error.empty() ? 0 : 1;
  }
  CaptureWriter capture;
  if (!config.record_path.empty()) {
    std::string why;
    if (!capture.open(config.record_path, why)) {
      log.error(why);
      writer->stop();
      return 1;
    }
  }

  asio::io_context io(1);
  SerialLink* link_ptr = nullptr;
  const bool lines = config.protocol == ProtocolVariant::text_lines;
  BoardCommands commands(BoardCommandSettings{}, [&](const protocol::BoardCommand& c) {
    if (lines) {
      const std::string text = protocol::encode_line(c, true);
      link_ptr->send(std::vector<std::uint8_t>(text.begin(), text.end()));
    } else {
      link_ptr->send(protocol::encode(c));
    }
  });
  ingest.set_ack_handler([&](const protocol::CommandAck& a, double t) { commands.on_ack(a, t); });
  // The config's reset schedule, carried out through BoardCommands (acks, retries).
  ResetDriver resets(
      config.reset_schedule,
      [&](protocol::CommandOp op, std::uint32_t argument, ResetDriver::Done done) {
        return commands.submit(op, argument, unix_now(), std::move(done));
      },
      [&](const std::string& kind, const std::string& detail, std::uint64_t index) {
        ingest.record_event(kind, detail, index);
      });
  ingest.set_block_observer([&](const BlockObservation& b) { resets.observe(b); });
  LinkSettings link_settings{config.device, unsigned(config.baud), config.reconnect_max_s,
                             to_string(config.parity), to_string(config.flow_control)};
  SerialLink link(
      io, link_settings, log, unix_now,
      [&](std::span<const std::uint8_t> bytes, double t) {
        capture.append(bytes, t);  // buffered; a failed capture stops itself and never blocks ingest's data
        ingest.on_bytes(bytes, t);
      },
      [&] {
        // Ask the board who it is, so a daemon started mid-stream learns the identity.
        commands.submit(protocol::CommandOp::identify, 0, unix_now(), [&](const CommandResult& r) {
          if (r.outcome != CommandOutcome::acked) log.notice("board did not acknowledge identify");
        });
      },
      [&](const std::string& why) {
        commands.abandon_all();
        ingest.on_link_lost(why);
      });
  link_ptr = &link;

  // The API: methods over a Unix socket (and TCP when configured), live notifications, control.
  api::MethodSettings method_settings;
  if (config.tcp) {
    std::ifstream token_in(config.tcp->token_file);
    std::getline(token_in, method_settings.tcp_token);
    while (!method_settings.tcp_token.empty() && std::isspace((unsigned char)method_settings.tcp_token.back()))
      method_settings.tcp_token.pop_back();
    if (!token_in && method_settings.tcp_token.empty()) {
      log.error("tcp.token_file: cannot read " + config.tcp->token_file);
      return 1;
    }
    if (method_settings.tcp_token.size() < 16) {
      log.error("tcp.token_file: the token in " + config.tcp->token_file + " must be at least 16 characters");
      return 1;
    }
  }
  api::Hub hub;
  // API board commands go through the reset driver, so BoardCommands' acks and
  // retries, the driver's counters and its events cover them like the schedule's.
  api::LinkControl control(link, ingest, resets);
  // A calibration set over the API joins the running config as a reload would.
  control.set_config_sink([&](const DaemonConfig& next) {
    config.channels = next.channels;
    ingest.reconfigure(config);
  });
  api::Server* server_ptr = nullptr;
  ingest.set_event_listener([&](const storage::EventRow& e) {
    if (hub.subscriptions() == 0) return;
    hub.publish_event({{"run_id", e.run_id ? nlohmann::json(*e.run_id) : nlohmann::json(nullptr)},
                       {"channel", e.channel ? nlohmann::json(*e.channel) : nlohmann::json(nullptr)},
                       {"sample_index", e.sample_index ? nlohmann::json(*e.sample_index) : nlohmann::json(nullptr)},
                       {"kind", e.kind}, {"detail", e.detail}, {"host_utc", storage::rfc3339_utc(e.host_unix)}});
  });
  api::Methods methods(config.database, [&] {
    nlohmann::json j = ingest.status();
    const auto w = writer->counters();
    nlohmann::json committed = nlohmann::json::object();
    for (const auto& [ch, index] : w.committed_last_index) committed[std::to_string(ch)] = index;
    j["link"] = link.status();
    j["reset_schedule"] = resets.status();
    const auto& cc = commands.counters();
    j["commands"] = {{"pending", commands.pending()}, {"submitted", cc.submitted}, {"sends", cc.sends},
                     {"retries", cc.retries}, {"acked", cc.acked}, {"timed_out", cc.timed_out},
                     {"refused", cc.refused}, {"unknown_acks", cc.unknown_acks}, {"abandoned", cc.abandoned}};
    j["writer"] = {{"commits", w.commits}, {"commit_failures", w.commit_failures},
                   {"raw_blocks_written", w.raw_blocks_written}, {"raw_blocks_shed", w.raw_blocks_shed},
                   {"series_points_written", w.series_points_written}, {"series_points_shed", w.series_points_shed},
                   {"segments_written", w.segments_written}, {"queued_bytes", w.queued_bytes},
                   {"queued_bytes_peak", w.queued_bytes_peak},
                   {"queue_soft_limit_bytes", writer_settings.soft_limit_bytes},
                   {"queue_hard_limit_bytes", writer_settings.hard_limit_bytes},
                   {"last_commit_unix", w.last_commit_unix}, {"last_error", w.last_error},
                   {"last_commit_ms", w.last_commit_ms}, {"max_commit_ms", w.max_commit_ms},
                   {"mean_commit_ms", w.commits ? w.sum_commit_ms / double(w.commits) : 0.0},
                   {"committed_last_index", committed},
                   {"write_errors", w.write_errors}, {"consecutive_failures", w.consecutive_failures},
                   {"retry_delay_ms", w.retry_delay_ms}, {"storage_recoveries", w.storage_recoveries},
                   {"disk_full_errors", w.disk_full_errors}, {"raw_stopped", w.raw_stopped},
                   {"raw_blocks_shed_disk", w.raw_blocks_shed_disk}, {"file_deleted", w.file_deleted},
                   {"file_replaced", w.file_replaced}, {"file_rescues", w.file_rescues},
                   {"file_rescue_failures", w.file_rescue_failures}, {"path", w.path}};
    j["database"] = config.database;
    if (server_ptr) {
      const auto& a = server_ptr->counters();
      j["api"] = {{"clients", a.clients}, {"accepted", a.accepted}, {"refused_too_many", a.refused_too_many},
                  {"cut_off", a.cut_off}, {"closed_idle", a.closed_idle},
                  {"closed_unfinished_line", a.closed_unfinished_line}, {"subscriptions", hub.subscriptions()},
                  {"notifications_sent", hub.counters().notifications_sent}};
    }
    return j;
  }, hub, &control, method_settings);
  // Reprocessing stored runs (API method "reprocess"), on its own thread; never the run being recorded.
  ReprocessJobs reprocess_jobs(
      io, config.database, *writer,
      [&]() -> std::optional<std::int64_t> {
        const nlohmann::json st = ingest.status();
        if (st.contains("run") && st["run"].is_object()) return st["run"].value("run_id", std::int64_t(0));
        return std::nullopt;
      },
      unix_now);
  methods.set_reprocessor(&reprocess_jobs);
  api::ServerSettings server_settings;
  server_settings.socket_path = config.socket_path;
  server_settings.socket_group = config.socket_group;
  if (config.tcp) {
    server_settings.tcp_address = config.tcp->address;
    server_settings.tcp_port = std::uint16_t(config.tcp->port);
    server_settings.tcp_allow_remote = config.tcp->allow_remote;
    server_settings.tcp_has_token = !method_settings.tcp_token.empty();
  }
  server_settings.max_clients = std::size_t(config.api_max_clients);
  server_settings.limits.max_queued_bytes = std::size_t(config.api_client_buffer_bytes);
  server_settings.limits.timeouts.idle = std::chrono::duration_cast<std::chrono::steady_clock::duration>(
      std::chrono::duration<double>(config.api_idle_timeout_s));
  server_settings.limits.timeouts.line = std::chrono::duration_cast<std::chrono::steady_clock::duration>(
      std::chrono::duration<double>(config.api_line_timeout_s));
  api::Server server(io, server_settings, methods, hub, log);
  server_ptr = &server;
  std::string why;
  if (!server.listen(why)) {
    log.error(why);
    writer->stop();
    return 1;
  }
  link.start();

  // Hand the writer what ingest gathered, at the commit cadence.
  asio::steady_timer flush_timer(io);
  std::function<void()> schedule_flush = [&] {
    flush_timer.expires_after(std::chrono::milliseconds(config.commit_interval_ms));
    flush_timer.async_wait([&](const boost::system::error_code& ec) {
      if (ec) return;
      if (hub.subscriptions() > 0) {
        // Live values at the commit cadence: what ingest holds now, committed or not.
        nlohmann::json st = ingest.status();
        if (st["run"].is_object())
          hub.publish_values({{"run_id", st["run"]["run_id"]}, {"next_index", st["run"]["next_index"]},
                              {"host_utc", storage::rfc3339_utc(unix_now())}},
                             st["run"]["channels"]);
      }
      ingest.flush();
      schedule_flush();
    });
  };
  schedule_flush();

  // Retries and timeouts of board commands, on the same loop.
  asio::steady_timer command_timer(io);
  std::function<void()> schedule_commands = [&] {
    command_timer.expires_after(std::chrono::milliseconds(100));
    command_timer.async_wait([&](const boost::system::error_code& ec) {
      if (ec) return;
      commands.tick(unix_now());
      schedule_commands();
    });
  };
  schedule_commands();

  // Watchdog keep-alives come from this loop, the one that reads the link and
  // runs ingest: if it stops turning, the keep-alives stop and systemd restarts
  // the service. Its own timer, so a long commit interval cannot starve it.
  asio::steady_timer watchdog_timer(io);
  std::function<void()> schedule_watchdog = [&] {
    watchdog_timer.expires_after(notifier.watchdog_interval());
    watchdog_timer.async_wait([&](const boost::system::error_code& ec) {
      if (ec) return;
      notifier.watchdog();
      schedule_watchdog();
    });
  };

  bool stopping = false;
  asio::signal_set signals(io, SIGINT, SIGTERM);
  signals.async_wait([&](const boost::system::error_code& ec, int signo) {
    if (ec) return;
    stopping = true;
    log.notice(std::string("stopping on ") + (signo == SIGTERM ? "SIGTERM" : "SIGINT"));
    notifier.stopping();
    link.stop();
    server.stop();
    flush_timer.cancel();
    watchdog_timer.cancel();
    command_timer.cancel();
    io.stop();
  });

  // SIGHUP: reload what can change in place; a bad file changes nothing.
  asio::signal_set hangup(io, SIGHUP);
  std::function<void()> wait_hangup = [&] {
    hangup.async_wait([&](const boost::system::error_code& ec, int) {
      if (ec || stopping) return;
      DaemonConfig fresh;
      std::vector<ConfigError> errors = build_config(flags, fresh);
      ReloadPlan plan = plan_reload(config, fresh, std::move(errors));
      if (!plan.errors.empty()) {
        for (const auto& e : plan.errors) log.error("reload: config: " + to_string(e));
        log.error("reload refused: " + std::to_string(plan.errors.size()) +
                  " config error(s); still running with the previous config");
        notifier.status("reload refused, previous config kept");
      } else {
        for (const auto& k : plan.need_restart)
          log.warning("reload: " + k + " changed; it keeps its old value until the service restarts");
        config = plan.next;
        log.set_threshold(config.log_level);
        ingest.reconfigure(config);
        resets.reconfigure(config.reset_schedule);
        log.notice("reload: applied " + (plan.applied.empty() ? std::string("no changes") : join(plan.applied)));
        notifier.status("config reloaded");
      }
      wait_hangup();
    });
  };
  wait_hangup();

  // Test-only: SIGUSR2 blocks this loop for good, as a deadlock would.
  asio::signal_set hang_signal(io);
  if (flags.hang_on_sigusr2) {
    hang_signal.add(SIGUSR2);
    hang_signal.async_wait([&](const boost::system::error_code& ec, int) {
      if (ec) return;
      log.warning("test hook: SIGUSR2, blocking the event loop");
      for (;;) std::this_thread::sleep_for(std::chrono::seconds(1));
    });
  }
  std::signal(SIGPIPE, SIG_IGN);

  // READY once the store is open, the socket listens and the link has made its
  // first attempt (posted after the link's coroutine, so it runs once that has
  // opened the device or scheduled a retry).
  asio::post(io, [&] {
    notifier.ready("store open, link " + std::string(to_string(link.state())));
    if (notifier.watchdog_interval().count() > 0) {
      notifier.watchdog();
      schedule_watchdog();
    }
    log.info("ready: listening on " + config.socket_path +
             (server.tcp_port() ? " and TCP port " + std::to_string(server.tcp_port()) : std::string()) + ", database " + config.database + ", link " +
             to_string(link.state()));
  });
  io.run();

  // Final flush: everything accepted is committed before exit, within a bound.
  StopDeadline deadline(config.stop_timeout_s, [&] {
    log.error("stop took longer than stop_timeout_s (" + std::to_string(config.stop_timeout_s) +
              " s); exiting without a final commit");
    std::_Exit(1);
  });
  ingest.flush();
  capture.close();
  if (capture.failed()) log.warning("the capture file could not be written completely: " + config.record_path);
  writer->stop();
  deadline.disarm();
  const auto w = writer->counters();
  const auto& n = ingest.counters();
  if (w.queued_bytes > 0 || !w.last_error.empty())
    log.warning("writer stopped with " + std::to_string(w.queued_bytes) + " bytes uncommitted; last error: " + w.last_error);
  log.info("stopped: accepted " + std::to_string(n.blocks) + " blocks (" + std::to_string(n.samples) +
           " samples); raw blocks written " + std::to_string(w.raw_blocks_written) + ", shed " +
           std::to_string(w.raw_blocks_shed) + "; commits " + std::to_string(w.commits));
  return w.queued_bytes == 0 ? 0 : 1;
}
