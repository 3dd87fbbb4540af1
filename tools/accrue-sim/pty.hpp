#pragma once
// PseudoTerminal owns a pty pair: the simulator writes the board's bytes to
// the master side; the daemon opens slave_path() like a serial device. The
// simulator also holds the slave open (in raw mode) so bytes written before
// the daemon opens it wait in the slave's input queue instead of being lost.
// Closing the master is the simulator's cable pull: the reader sees EOF.
#include <string>

namespace accrue::sim {

class PseudoTerminal {
 public:
  PseudoTerminal() = default;
  ~PseudoTerminal();
  PseudoTerminal(const PseudoTerminal&) = delete;
  PseudoTerminal& operator=(const PseudoTerminal&) = delete;

  bool open(std::string& why);
  void close();
  int master_fd() const { return master_; }
  const std::string& slave_path() const { return slave_path_; }
  // Bytes written but not yet read by the daemon.
  int unread_bytes() const;

 private:
  int master_ = -1;
  int slave_ = -1;
  std::string slave_path_;
};

}  // namespace accrue::sim
