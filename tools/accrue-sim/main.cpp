// accrue-sim: a simulated integrator board on a pseudo-terminal.
#include <poll.h>
#include <sys/stat.h>
#include <unistd.h>

#include <csignal>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <thread>

#include "protocol/decoder.hpp"
#include "protocol/line_codec.hpp"
#include "tools/accrue-sim/board_model.hpp"
#include "tools/accrue-sim/pty.hpp"

namespace {

using namespace accrue;

// Set by SIGTERM/SIGINT so the simulator ends like a finished run: the link is
// removed before the terminal closes. A signal handler can only reach a flag
// of static storage; nothing else in the program is global.
volatile std::sig_atomic_t g_stop_requested = 0;
void request_stop(int) { g_stop_requested = 1; }

// The symbolic link of --link, owned for the process's lifetime.
class DeviceLink {
 public:
  DeviceLink() = default;
  ~DeviceLink() { remove(); }
  DeviceLink(const DeviceLink&) = delete;
  DeviceLink& operator=(const DeviceLink&) = delete;
  bool create(const std::string& link_path, const std::string& target, std::string& why) {
    struct stat st {};
    if (::lstat(link_path.c_str(), &st) == 0) {
      if (!S_ISLNK(st.st_mode)) {
        why = link_path + " exists and is not a symbolic link";
        return false;
      }
      ::unlink(link_path.c_str());
    }
    if (::symlink(target.c_str(), link_path.c_str()) != 0) {
      why = "cannot create " + link_path + ": " + std::strerror(errno);
      return false;
    }
    path_ = link_path;
    return true;
  }
  void remove() {
    if (!path_.empty()) ::unlink(path_.c_str());
    path_.clear();
  }

 private:
  std::string path_;
};

constexpr const char* kUsage = R"(usage: accrue-sim [options]

Simulates an integrator board (charge amplifier, drift, resets, ADC) playing an
invented scenario, and streams its frames on a new pseudo-terminal. Prints the
pseudo-terminal's path on the first line of stdout. At the end it writes the
truth (the exact integrated charge) as JSON.

options:
  --scenario FILE       JSON overrides of the default scenario (see --print-scenario)
  --set KEY=VALUE       override one scenario number, e.g. --set duration_s=600
                        or --set front_end.bias_a=2e-12 (repeatable); faults too,
                        e.g. --set faults.drop_frame_rate=1e-3 or
                        --set faults.cable_pull_at_s=[300,900] (see --print-scenario)
  --text-lines          speak the text-line variant (PROTOCOL.md section 5), same as
                        --set wire=text_lines
  --speed X             board time per wall time (default 0: as fast as the reader takes it)
  --truth FILE          write the truth JSON here (default: stdout, after the path line)
  --path-file FILE      also write the pseudo-terminal path to FILE
  --link PATH           make PATH a symbolic link to the pseudo-terminal, removed
                        again before the simulator closes it; a reader that keeps
                        reopening PATH then finds nothing instead of a later
                        simulator's terminal that reuses the same /dev/pts number
  --linger-s S          wait at most S seconds for the reader to drain before closing (default 60)
  --print-scenario      print the scenario as JSON and exit
  --help                this text
)";

bool set_key(nlohmann::json& overrides, const std::string& kv, std::string& why) {
  const auto eq = kv.find('=');
  if (eq == std::string::npos) {
    why = "--set needs KEY=VALUE, got " + kv;
    return false;
  }
  const std::string key = kv.substr(0, eq), value = kv.substr(eq + 1);
  nlohmann::json v = nlohmann::json::parse(value, nullptr, false);
  if (v.is_discarded()) v = value;
  nlohmann::json* at = &overrides;
  std::stringstream path(key);
  std::string part, last;
  std::vector<std::string> parts;
  while (std::getline(path, part, '.')) parts.push_back(part);
  for (std::size_t i = 0; i + 1 < parts.size(); ++i) at = &(*at)[parts[i]];
  (*at)[parts.back()] = v;
  return true;
}

// Reads the host's commands (frames or text lines, as the board speaks) and answers them.
class CommandReader {
 public:
  CommandReader(sim::BoardModel& board, bool lines) : board_(board), lines_(lines) {}
  void on_bytes(std::span<const std::uint8_t> bytes, std::vector<std::uint8_t>& replies) {
    commands_.clear();
    if (lines_) line_decoder_.feed(bytes, commands_);
    else decoder_.feed(bytes, commands_);
    for (const auto& m : commands_)
      if (auto* c = std::get_if<protocol::BoardCommand>(&m)) board_.command(*c, replies);
  }
  void reset() {
    decoder_.reset();
    line_decoder_.reset();
  }

 private:
  sim::BoardModel& board_;
  bool lines_;
  protocol::Decoder decoder_;
  protocol::LineDecoder line_decoder_;
  std::vector<protocol::Message> commands_;
};

bool write_all(int fd, const std::uint8_t* data, std::size_t n, CommandReader& reader,
               std::vector<std::uint8_t>& replies) {
  std::size_t done = 0;
  std::uint8_t in[4096];
  while (done < n) {
    if (g_stop_requested) return true;
    pollfd p{fd, POLLOUT | POLLIN, 0};
    if (::poll(&p, 1, 1000) < 0 && errno != EINTR) return false;
    if (p.revents & POLLIN) {
      const ssize_t r = ::read(fd, in, sizeof in);
      if (r > 0) reader.on_bytes(std::span<const std::uint8_t>(in, std::size_t(r)), replies);
    }
    if (p.revents & POLLOUT) {
      const ssize_t w = ::write(fd, data + done, n - done);
      if (w > 0) done += std::size_t(w);
      else if (w < 0 && errno != EAGAIN && errno != EINTR) return false;
    }
  }
  return true;
}

// Waits until `due`, reading the host's commands meanwhile (their replies go
// out with the next chunk); wakes at least every 50 ms for a stop request.
bool wait_listening(int fd, std::chrono::steady_clock::time_point due, CommandReader& reader,
                    std::vector<std::uint8_t>& replies) {
  std::uint8_t in[4096];
  for (auto now = std::chrono::steady_clock::now(); !g_stop_requested && now < due;
       now = std::chrono::steady_clock::now()) {
    const auto wait_ms = std::chrono::duration_cast<std::chrono::milliseconds>(due - now).count();
    pollfd p{fd, POLLIN, 0};
    const int ready = ::poll(&p, 1, int(std::clamp<long long>(wait_ms, 1, 50)));
    if (ready < 0 && errno != EINTR) return false;
    if (ready <= 0) continue;
    const ssize_t r = (p.revents & POLLIN) ? ::read(fd, in, sizeof in) : 0;
    if (r > 0) reader.on_bytes(std::span<const std::uint8_t>(in, std::size_t(r)), replies);
    // No reader on the terminal (hang-up, EIO): nothing to take; just keep time.
    else std::this_thread::sleep_for(std::chrono::milliseconds(std::clamp<long long>(wait_ms, 1, 50)));
  }
  return true;
}

// Sleeps `s` seconds of wall time, waking early on a stop request.
void nap(double s) {
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration_cast<std::chrono::steady_clock::duration>(
                                                            std::chrono::duration<double>(s));
  while (!g_stop_requested && std::chrono::steady_clock::now() < until)
    std::this_thread::sleep_for(std::min<std::chrono::steady_clock::duration>(until - std::chrono::steady_clock::now(),
                                                                              std::chrono::milliseconds(50)));
}

// Waits (at most `limit_s`) until the reader has taken every byte written.
// The count the terminal reports covers only its read queue, not bytes still
// on their way from the master side, so it must stay at zero for a while:
// the kernel moves them in a deferred work item, which on a loaded machine
// (a CI run beside builds) has been seen to wait well over 100 ms.
void drain(const sim::PseudoTerminal& pty, double limit_s) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(limit_s);
  constexpr int kQuietChecks = 25;  // 0.5 s of an empty read queue
  int quiet_checks = 0;
  while (!g_stop_requested && quiet_checks < kQuietChecks && std::chrono::steady_clock::now() < deadline) {
    quiet_checks = pty.unread_bytes() > 0 ? 0 : quiet_checks + 1;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
}

}  // namespace

int main(int argc, char** argv) {
  sim::Scenario scenario;
  nlohmann::json overrides = nlohmann::json::object();
  double speed = 0.0, linger_s = 60.0;
  std::string truth_path, path_file, link_path;
  bool print_scenario = false;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&]() -> std::string {
      if (i + 1 >= argc) {
        std::fprintf(stderr, "accrue-sim: %s needs a value\n", a.c_str());
        std::exit(2);
      }
      return argv[++i];
    };
    std::string why;
    if (a == "--help" || a == "-h") {
      std::fputs(kUsage, stdout);
      return 0;
    } else if (a == "--scenario") {
      std::ifstream in(value());
      const auto j = nlohmann::json::parse(in, nullptr, false, true);
      if (j.is_discarded() || !j.is_object()) {
        std::fprintf(stderr, "accrue-sim: --scenario: not a JSON object\n");
        return 2;
      }
      overrides.merge_patch(j);
    } else if (a == "--set") {
      if (!set_key(overrides, value(), why)) {
        std::fprintf(stderr, "accrue-sim: %s\n", why.c_str());
        return 2;
      }
    } else if (a == "--speed") {
      speed = std::atof(value().c_str());
    } else if (a == "--truth") {
      truth_path = value();
    } else if (a == "--path-file") {
      path_file = value();
    } else if (a == "--link") {
      link_path = value();
    } else if (a == "--linger-s") {
      linger_s = std::atof(value().c_str());
    } else if (a == "--text-lines") {
      overrides["wire"] = "text_lines";
    } else if (a == "--print-scenario") {
      print_scenario = true;
    } else {
      std::fprintf(stderr, "accrue-sim: unknown option %s (see --help)\n", a.c_str());
      return 2;
    }
  }
  if (std::string err = sim::apply_json(overrides, scenario); !err.empty()) {
    std::fprintf(stderr, "accrue-sim: scenario: %s\n", err.c_str());
    return 2;
  }
  if (print_scenario) {
    std::cout << sim::to_json(scenario).dump(2) << "\n";
    return 0;
  }

  sim::PseudoTerminal pty;
  std::string why;
  if (!pty.open(why)) {
    std::fprintf(stderr, "accrue-sim: %s\n", why.c_str());
    return 1;
  }
  DeviceLink link;  // declared after pty: on any return it goes before the terminal closes
  if (!link_path.empty() && !link.create(link_path, pty.slave_path(), why)) {
    std::fprintf(stderr, "accrue-sim: --link: %s\n", why.c_str());
    return 1;
  }
  std::signal(SIGTERM, request_stop);
  std::signal(SIGINT, request_stop);
  std::printf("%s\n", pty.slave_path().c_str());
  std::fflush(stdout);
  if (!path_file.empty()) {
    std::ofstream(path_file) << pty.slave_path() << "\n";
  }

  sim::BoardModel board(scenario);
  // Link faults sit between the board and the terminal; the board's own
  // (reboot, clock skew) are in the model. Off unless the scenario asks.
  sim::FaultInjector injector(scenario.faults, scenario.wire == sim::Wire::frames);
  if (scenario.faults.any()) board.set_injector(&injector);
  CommandReader reader(board, scenario.wire == sim::Wire::lines);
  std::vector<double> pulls = scenario.faults.cable_pull_at_s;
  std::sort(pulls.begin(), pulls.end());
  std::size_t next_pull = 0;
  bool stall_due = scenario.faults.stall_at_s >= 0;
  if (!pulls.empty() && link_path.empty())
    std::fprintf(stderr, "accrue-sim: warning: cable pulls without --link: a reader cannot find the new terminal\n");
  std::vector<std::uint8_t> out, replies;
  const auto wall_start = std::chrono::steady_clock::now();
  // Unpaced, large chunks keep the writes few. Paced, a chunk is at most
  // 20 ms of wall time: a command the host sends takes effect at the next
  // chunk, as a real board would act on it within a block or so.
  const std::uint64_t chunk =
      speed > 0 ? std::max<std::uint64_t>(scenario.samples_per_block,
                                          std::uint64_t(0.02 * speed / scenario.sample_period_s))
                : std::max<std::uint64_t>(scenario.samples_per_block, 8192);
  bool ok = true;
  while (ok) {
    // Stop producing exactly where the next cable pull or stall is due.
    std::uint64_t n = chunk;
    const double now_s = board.true_time_s();
    const double pull_s = next_pull < pulls.size() ? pulls[next_pull] : HUGE_VAL;
    const double stall_s = stall_due ? scenario.faults.stall_at_s : HUGE_VAL;
    const double next_fault_s = std::min(pull_s, stall_s);
    if (next_fault_s <= now_s) {
      if (stall_s <= now_s) {
        injector.stall_next_block();
        stall_due = false;
      } else {
        // Cable pull: the reader takes what was sent, then link and terminal
        // go; the board runs on unheard for cable_pull_s; a new terminal and
        // the same link come back after cable_pull_pause_s of wall time.
        ++next_pull;
        drain(pty, std::min(linger_s, 10.0));
        link.remove();
        pty.close();
        injector.set_cable_out(true);
        out.clear();
        board.produce(std::uint64_t(std::llround(scenario.faults.cable_pull_s / scenario.sample_period_s)), out);
        injector.set_cable_out(false);
        replies.clear();  // nothing is heard while the cable is out
        reader.reset();
        nap(scenario.faults.cable_pull_pause_s);
        if (!pty.open(why) || (!link_path.empty() && !link.create(link_path, pty.slave_path(), why))) {
          std::fprintf(stderr, "accrue-sim: after a cable pull: %s\n", why.c_str());
          ok = false;
          break;
        }
        if (!path_file.empty()) std::ofstream(path_file) << pty.slave_path() << "\n";
        if (board.finished()) break;
      }
      continue;
    }
    if (next_fault_s < HUGE_VAL)
      n = std::min<std::uint64_t>(n, std::uint64_t(std::ceil((next_fault_s - now_s) / board.true_period_s())));
    out.clear();
    const bool more = board.produce(n, out);
    std::size_t cut = 0;
    if (injector.take_stall(cut)) {
      // The board went silent in the middle of a frame for a while.
      ok = write_all(pty.master_fd(), out.data(), cut, reader, replies);
      nap(scenario.faults.stall_pause_s);
      out.erase(out.begin(), out.begin() + std::ptrdiff_t(cut));
    }
    out.insert(out.end(), replies.begin(), replies.end());
    replies.clear();
    if (ok) ok = write_all(pty.master_fd(), out.data(), out.size(), reader, replies);
    if (!more || g_stop_requested) break;
    if (speed > 0) {
      const double board_s = board.true_time_s();
      const auto due = wall_start + std::chrono::duration_cast<std::chrono::steady_clock::duration>(
                                        std::chrono::duration<double>(board_s / speed));
      ok = wait_listening(pty.master_fd(), due, reader, replies);
    }
  }
  if (!replies.empty()) write_all(pty.master_fd(), replies.data(), replies.size(), reader, replies);

  const auto& t = board.truth();
  nlohmann::json truth = {
      {"scenario", scenario.name},
      {"quantity", "charge"},
      {"unit", "C"},
      {"true_total", double(t.charge_c)},
      {"charge_lost_in_dead_time", double(t.lost_in_dead_c)},
      {"samples", t.samples},
      {"last_index", t.samples ? t.samples - 1 : 0},
      {"resets", t.resets},
      {"clipped_samples", t.clipped_samples},
      {"sample_period_s", scenario.sample_period_s},
      {"drift_v_per_s", scenario.drift_v_per_s()},
      {"c_farad", scenario.front_end.c_farad},
      {"noise_v", scenario.front_end.noise_v},
      {"zero_window_s", scenario.zero_window_s},
      {"reset_s", scenario.front_end.reset_s},
      {"adc_lsb_v", scenario.adc.full_scale_v / std::ldexp(1.0, scenario.adc.bits - 1)},
      {"max_input_current_a", scenario.beam.current_a * (1.0 + std::fabs(scenario.beam.modulation))},
      {"complete", ok && !g_stop_requested},
      {"channel_count", scenario.channel_count},
      {"wire", scenario.wire == sim::Wire::lines ? "text_lines" : "frames"},
      {"sessions", t.sessions},
      {"unsent_at_reboot", t.unsent_at_reboot},
      {"faults", injector.counts().to_json()},
      {"fault_settings", sim::to_json(scenario.faults)},
  };
  // Per channel: its own input and front end (channel 0 is also the top level).
  truth["channels"] = nlohmann::json::array();
  for (int k = 0; k < scenario.channel_count; ++k) {
    const auto m = scenario.channel(k);
    const auto& ct = t.channels[std::size_t(k)];
    truth["channels"].push_back({{"channel", k},
                                 {"true_total", double(ct.charge_c)},
                                 {"charge_lost_in_dead_time", double(ct.lost_in_dead_c)},
                                 {"charge_during_reboot", double(ct.during_reboot_c)},
                                 {"clipped_samples", ct.clipped_samples},
                                 {"c_farad", m.front_end.c_farad},
                                 {"r1_ohm", m.front_end.r1_ohm},
                                 {"noise_v", m.front_end.noise_v},
                                 {"drift_v_per_s", sim::drift_v_per_s(m.front_end)},
                                 {"max_input_current_a", m.beam.current_a * (1.0 + std::fabs(m.beam.modulation))}});
  }
  truth["charge_during_reboot"] = double(t.channels[0].during_reboot_c);
  if (truth_path.empty()) {
    std::cout << truth.dump() << "\n";
    std::cout.flush();
  } else {
    std::ofstream f(truth_path + ".tmp");
    f << truth.dump(2) << "\n";
    f.close();
    std::rename((truth_path + ".tmp").c_str(), truth_path.c_str());
  }
  // Let the reader drain what is still queued before the cable is "pulled".
  drain(pty, linger_s);
  if (!g_stop_requested) std::this_thread::sleep_for(std::chrono::milliseconds(100));
  link.remove();
  pty.close();
  if (!ok) {
    std::fprintf(stderr, "accrue-sim: writing to the pseudo-terminal failed: %s\n", std::strerror(errno));
    return 1;
  }
  return 0;
}
