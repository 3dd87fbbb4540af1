// accrued: the accrue measurement and logging daemon.
#include <unistd.h>

#include <chrono>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <iostream>
#include <string>

#include "daemon/api/methods.hpp"
#include "daemon/api/server.hpp"
#include "daemon/asio.hpp"
#include "daemon/capture.hpp"
#include "daemon/ingest.hpp"
#include "daemon/options.hpp"
#include "daemon/port_finder.hpp"
#include "daemon/serial_link.hpp"
#include "daemon/service.hpp"
#include "protocol/encoder.hpp"
#include "storage/reader.hpp"
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
  --check-config FILE  validate FILE, print every error, exit 0 if valid
  --list-ports         list serial ports with their USB ids and exit
  --help               this text
  --version            print the version
)";

double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

int print_errors(const std::vector<ConfigError>& errors) {
  for (const auto& e : errors) std::fprintf(stderr, "accrued: config: %s: %s\n", e.key.c_str(), e.reason.c_str());
  return errors.empty() ? 0 : 2;
}

}  // namespace

int main(int argc, char** argv) {
  DaemonConfig config;
  std::vector<std::string> args(argv + 1, argv + argc);
  // The config file first, so that flags override it wherever they stand.
  for (std::size_t i = 0; i + 1 < args.size(); ++i) {
    if (args[i] == "--config") {
      if (int rc = print_errors(load_config(args[i + 1], config))) return rc;
    }
  }
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
      if (int rc = print_errors(errors)) return rc;
      std::printf("%s: valid\n", f->c_str());
      return 0;
    } else if (a == "--config") {
      ++i;
    } else if (a == "--device") {
      const std::string* v = value("--device");
      if (!v) return 2;
      config.device = *v;
    } else if (a == "--baud") {
      const std::string* v = value("--baud");
      if (!v) return 2;
      config.baud = std::atoi(v->c_str());
    } else if (a == "--database") {
      const std::string* v = value("--database");
      if (!v) return 2;
      config.database = *v;
    } else if (a == "--socket") {
      const std::string* v = value("--socket");
      if (!v) return 2;
      config.socket_path = *v;
    } else if (a == "--record") {
      const std::string* v = value("--record");
      if (!v) return 2;
      config.record_path = *v;
    } else if (a == "--replay") {
      const std::string* v = value("--replay");
      if (!v) return 2;
      config.replay_path = *v;
    } else if (a == "--log-level") {
      const std::string* v = value("--log-level");
      if (!v) return 2;
      if (!parse_log_level(*v, config.log_level)) {
        std::fprintf(stderr, "accrued: --log-level: unknown level %s\n", v->c_str());
        return 2;
      }
    } else {
      std::fprintf(stderr, "accrued: unknown option %s (see --help)\n", a.c_str());
      return 2;
    }
  }
  if (int rc = print_errors(validate(config))) return rc;

  Logger log = Logger::for_environment(config.log_level);
  ServiceNotifier notifier;

  storage::WriterSettings writer_settings;
  writer_settings.commit_interval = std::chrono::milliseconds(config.commit_interval_ms);
  std::unique_ptr<storage::Writer> writer;
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
  std::uint16_t next_request_id = 1;
  SerialLink* link_ptr = nullptr;
  SerialLink link(
      io, LinkSettings{config.device, unsigned(config.baud), config.reconnect_max_s}, log, unix_now,
      [&](std::span<const std::uint8_t> bytes, double t) {
        capture.append(bytes, t);  // buffered; a failed capture stops itself and never blocks ingest's data
        ingest.on_bytes(bytes, t);
      },
      [&] {
        // Ask the board who it is, so a daemon started mid-stream learns the identity.
        link_ptr->send(protocol::encode(protocol::BoardCommand{next_request_id++, protocol::CommandOp::identify, 0}));
      },
      [&](const std::string& why) { ingest.on_link_lost(why); });
  link_ptr = &link;

  api::Methods methods(config.database, [&] {
    nlohmann::json j = ingest.status();
    const auto w = writer->counters();
    nlohmann::json committed = nlohmann::json::object();
    for (const auto& [ch, index] : w.committed_last_index) committed[std::to_string(ch)] = index;
    j["link"] = {{"state", to_string(link.state())}, {"device", link.device_path()}, {"last_error", link.last_error()},
                 {"opens", link.opens()}, {"drops", link.drops()}, {"unsent_commands", link.unsent_commands()}};
    j["writer"] = {{"commits", w.commits}, {"commit_failures", w.commit_failures},
                   {"raw_blocks_written", w.raw_blocks_written}, {"raw_blocks_shed", w.raw_blocks_shed},
                   {"series_points_written", w.series_points_written}, {"series_points_shed", w.series_points_shed},
                   {"segments_written", w.segments_written}, {"queued_bytes", w.queued_bytes},
                   {"last_commit_unix", w.last_commit_unix}, {"last_error", w.last_error},
                   {"committed_last_index", committed}};
    j["database"] = config.database;
    return j;
  });
  api::Server server(io, api::ServerSettings{config.socket_path}, methods, log);
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
      ingest.flush();
      notifier.watchdog();  // the loop turned: it is alive
      schedule_flush();
    });
  };
  schedule_flush();

  asio::signal_set signals(io, SIGINT, SIGTERM);
  signals.async_wait([&](const boost::system::error_code& ec, int signo) {
    if (ec) return;
    log.notice(std::string("stopping on ") + (signo == SIGTERM ? "SIGTERM" : "SIGINT"));
    notifier.stopping();
    link.stop();
    server.stop();
    flush_timer.cancel();
    io.stop();
  });
  std::signal(SIGPIPE, SIG_IGN);

  notifier.ready("store open, link " + std::string(to_string(link.state())));
  log.info("listening on " + config.socket_path + ", database " + config.database);
  io.run();

  // Final flush: everything accepted is committed before exit.
  ingest.flush();
  capture.close();
  if (capture.failed()) log.warning("the capture file could not be written completely: " + config.record_path);
  writer->stop();
  const auto w = writer->counters();
  if (w.queued_bytes > 0 || !w.last_error.empty())
    log.warning("writer stopped with " + std::to_string(w.queued_bytes) + " bytes uncommitted; last error: " + w.last_error);
  log.info("stopped");
  return 0;
}
