# Start-up and clean-up shared by the end-to-end scripts (sourced, not run;
# tests/CMakeLists.txt globs only tests/e2e/*.sh, so this folder is not a test).
#
# e2e_setup TAG [hard]
#   Makes $work (a fresh /tmp/accrue-TAG.XXXXXX), an empty $pids array and an
#   EXIT trap that signals every pid in it, waits for them, then removes $work
#   (kept when ACCRUE_KEEP_WORK is set, to read a failed run's logs). With
#   "hard" the trap sends SIGKILL: for scripts whose daemons are meant to die
#   without committing, or whose simulators would otherwise linger.
# e2e_wait_link PATH, e2e_wait_socket PATH
#   Wait until PATH is a symbolic link (a simulator's --link) or a socket (a
#   daemon's API), up to 30 s, and fail with a message naming the path when it
#   never appears: a start-up that failed says so here, not as a confusing
#   error later on.
# e2e_start_daemon
#   Starts "$daemon" on the simulator's link "$work/board" with the store
#   "$work/a.db" and the socket "$work/s.sock", its log in "$work/daemon.err";
#   adds it to $pids, sets $daemon_pid and waits for the socket.

e2e_setup() {
  work=$(mktemp -d "/tmp/accrue-$1.XXXXXX")
  pids=()
  e2e_kill_signal=TERM
  [ "${2:-}" != hard ] || e2e_kill_signal=KILL
  trap e2e_cleanup EXIT
}

e2e_cleanup() {
  local p
  for p in "${pids[@]}"; do kill -s "$e2e_kill_signal" "$p" 2>/dev/null || true; done
  wait 2>/dev/null || true
  [ -n "${ACCRUE_KEEP_WORK:-}" ] || rm -rf "$work"
}

e2e_wait_for() {
  local test_flag=$1 path=$2 what=$3 _
  for _ in $(seq 600); do
    test "$test_flag" "$path" && return 0
    sleep 0.05
  done
  echo "no $what at $path after 30 s" >&2
  return 1
}

e2e_wait_link() { e2e_wait_for -L "$1" "simulator link"; }
e2e_wait_socket() { e2e_wait_for -S "$1" "daemon socket"; }

e2e_start_daemon() {
  "$daemon" --device "$work/board" --database "$work/a.db" --socket "$work/s.sock" 2>"$work/daemon.err" &
  daemon_pid=$!
  pids+=("$daemon_pid")
  e2e_wait_socket "$work/s.sock"
}
