// accrue: the command-line client for accrued.
#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include "tools/accrue/commands.hpp"
#include "tools/accrue/plan_command.hpp"
#include "tools/accrue/reprocess_command.hpp"

namespace {

constexpr const char* kUsage = R"(usage: accrue [--socket PATH] [--json] COMMAND [options]

Talks to accrued over its JSON-RPC 2.0 socket.

commands:
  status                      link, board, run, live totals and counters
  totals                      committed running total per channel, with U (k=2)
  runs                        board sessions recorded in the store
  window [--channel N] [--run ID] [--derivation D] [--from T] [--to T] [--points N] [--select S]
                              a window of the derived series; T is a sample
                              index, Unix seconds (with a fraction) or RFC 3339;
                              S is all, volts, quantity, total or rate
  export [window options] [--output FILE]
                              the window as CSV (RFC 4180: CRLF, UTC times,
                              units in the header); default to stdout
  plot [window options] [--title TEXT] [--width PX] --output FILE.svg
                              the window as an SVG picture: running total with
                              U (k=2), rate, resets, zero/quiet windows, events
  channels                    channels with their newest calibration and live total
  calibration [--channel N]   every calibration version
  segments [--channel N] [--run ID] [--derivation D] [--from T] [--to T] [--after K] [--limit N]
                              reset-to-reset segments and what each contributed
  events [--kind K]... [--channel N] [--run ID] [--from T] [--to T] [--after E] [--limit N]
                              board and daemon events
  tail [--topics values,events] [--channel N]... [--count N] [--seconds S]
                              live values and events as they come (subscribe)
  reset                       discharge the integrators now (control)
  zero start|stop             close or open the zero relay (control)
  quiet --from T --to T [--channel N] [--note TEXT]
                              mark an interval with no input (control)
  calibrate --channel N SETTINGS
                              new calibration settings for a channel, as a JSON
                              object of config "channels" keys (control)
  compare --truth FILE [--max-error-percent X]
                              the committed total beside a simulator's truth
  wait [--timeout S]          wait until the newest run has ended and all of it
                              is committed
  reprocess (--run ID | --from T --to T) [--c C] [--baseline M] [--drop-baseline N] ...
                              recompute a stored run with a corrected
                              calibration or baseline as a new derivation,
                              the original kept; see accrue reprocess --help
  plan --r1 R --c C [--r2 R] --input MIN:MAX [options]
                              plan an integrator front end (response,
                              drift, reset schedule, floors); needs no
                              daemon; see accrue plan --help

options:
  --socket PATH   the daemon's socket (default accrued.sock, or $ACCRUE_SOCKET)
  --json          machine-readable output
  --help          this text
)";

}  // namespace

int main(int argc, char** argv) {
  accrue::client::CommonOptions o;
  if (const char* env = std::getenv("ACCRUE_SOCKET")) o.socket_path = env;
  int i = 1;
  for (; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--help" || a == "-h") {
      std::fputs(kUsage, stdout);
      return 0;
    } else if (a == "--json") {
      o.json = true;
    } else if (a == "--socket") {
      if (i + 1 >= argc) {
        std::fprintf(stderr, "accrue: --socket needs a value\n");
        return 2;
      }
      o.socket_path = argv[++i];
    } else {
      break;
    }
  }
  if (i >= argc) {
    std::fputs(kUsage, stderr);
    return 2;
  }
  const std::string command = argv[i];
  std::vector<std::string> args;
  for (int k = i + 1; k < argc; ++k) {
    if (std::strcmp(argv[k], "--json") == 0) o.json = true;
    else args.emplace_back(argv[k]);
  }
  using namespace accrue::client;
  if (command == "status") return cmd_status(o, args);
  if (command == "totals") return cmd_totals(o, args);
  if (command == "runs") return cmd_runs(o, args);
  if (command == "window") return cmd_window(o, args);
  if (command == "compare") return cmd_compare(o, args);
  if (command == "wait") return cmd_wait(o, args);
  if (command == "export") return cmd_export(o, args);
  if (command == "plot") return cmd_plot(o, args);
  if (command == "channels") return cmd_channels(o, args);
  if (command == "calibration") return cmd_calibration(o, args);
  if (command == "segments") return cmd_segments(o, args);
  if (command == "events") return cmd_events(o, args);
  if (command == "tail") return cmd_tail(o, args);
  if (command == "reset") return cmd_reset(o, args);
  if (command == "zero") return cmd_zero(o, args);
  if (command == "quiet") return cmd_quiet(o, args);
  if (command == "calibrate") return cmd_calibrate(o, args);
  if (command == "plan") return cmd_plan(o.json, args);
  if (command == "reprocess") return cmd_reprocess(o, args);
  std::fprintf(stderr, "accrue: unknown command %s (see --help)\n", command.c_str());
  return 2;
}
