#include "daemon/reload.hpp"

namespace accrue::daemon {

ReloadPlan plan_reload(const DaemonConfig& running, const DaemonConfig& fresh, std::vector<ConfigError> load_errors) {
  ReloadPlan plan;
  plan.next = running;
  if (!load_errors.empty()) {
    plan.errors = std::move(load_errors);
    return plan;
  }
  // In place: the parts the chain reads per run or per decision.
  if (fresh.channels != running.channels) {
    plan.next.channels = fresh.channels;
    plan.applied.push_back("channels");
  }
  if (!(fresh.reset_schedule == running.reset_schedule)) {
    plan.next.reset_schedule = fresh.reset_schedule;
    plan.applied.push_back("reset_schedule");
  }
  if (fresh.zero_windows != running.zero_windows) {
    plan.next.zero_windows = fresh.zero_windows;
    plan.applied.push_back("zero_windows");
  }
  if (fresh.log_level != running.log_level) {
    plan.next.log_level = fresh.log_level;
    plan.applied.push_back("log_level");
  }
  if (fresh.stop_timeout_s != running.stop_timeout_s) {
    plan.next.stop_timeout_s = fresh.stop_timeout_s;
    plan.applied.push_back("stop_timeout_s");
  }
  // Everything else is bound to an open device, file or socket.
  auto restart = [&](bool changed, const char* key) {
    if (changed) plan.need_restart.push_back(key);
  };
  restart(fresh.device != running.device, "device");
  restart(fresh.baud != running.baud, "baud");
  restart(fresh.data_bits != running.data_bits, "data_bits");
  restart(fresh.stop_bits != running.stop_bits, "stop_bits");
  restart(fresh.parity != running.parity, "parity");
  restart(fresh.flow_control != running.flow_control, "flow_control");
  restart(fresh.reconnect_max_s != running.reconnect_max_s, "reconnect_max_s");
  restart(fresh.protocol != running.protocol, "protocol");
  restart(fresh.settle_s != running.settle_s, "settle_s");
  restart(fresh.end_window != running.end_window, "end_window");
  restart(fresh.series_interval_s != running.series_interval_s, "series_interval_s");
  restart(fresh.database != running.database, "database");
  restart(fresh.commit_interval_ms != running.commit_interval_ms, "commit_interval_ms");
  restart(fresh.retention.raw_days != running.retention.raw_days || fresh.retention.series_days != running.retention.series_days ||
              fresh.retention.rollup_days != running.retention.rollup_days,
          "retention");
  restart(fresh.disk_floor_mb != running.disk_floor_mb, "disk_floor_mb");
  restart(fresh.writer_queue_soft_limit_mib != running.writer_queue_soft_limit_mib, "writer_queue_soft_limit_mib");
  restart(fresh.writer_queue_hard_limit_mib != running.writer_queue_hard_limit_mib, "writer_queue_hard_limit_mib");
  restart(fresh.socket_path != running.socket_path, "socket");
  restart(fresh.socket_group != running.socket_group, "socket_group");
  restart(fresh.api_idle_timeout_s != running.api_idle_timeout_s, "api_idle_timeout_s");
  restart(fresh.api_line_timeout_s != running.api_line_timeout_s, "api_line_timeout_s");
  // The server is built with these at start (its client table and each client's queue).
  restart(fresh.api_max_clients != running.api_max_clients, "api_max_clients");
  restart(fresh.api_client_buffer_bytes != running.api_client_buffer_bytes, "api_client_buffer_bytes");
  restart(fresh.tcp.has_value() != running.tcp.has_value() ||
              (fresh.tcp && (fresh.tcp->address != running.tcp->address || fresh.tcp->port != running.tcp->port ||
                             fresh.tcp->token_file != running.tcp->token_file ||
                             fresh.tcp->allow_remote != running.tcp->allow_remote)),
          "tcp");
  return plan;
}

}  // namespace accrue::daemon
