#pragma once
// A raw serial capture: the bytes a link delivered, each chunk with its host
// receive time, so a field unit's stream can be replayed at a desk through the
// whole daemon path. Format (ours, little-endian):
//   header  "ACCRUE-CAPTURE\n" (15 bytes), u32 format version (1)
//   record  f64 receive time (Unix seconds), u32 length L (1..1 MiB), L bytes
// A truncated last record (power cut while recording) is ignored on replay and
// reported; everything before it replays.
#include <cstdint>
#include <cstdio>
#include <functional>
#include <span>
#include <string>

namespace accrue::daemon {

class CaptureWriter {
 public:
  CaptureWriter() = default;
  ~CaptureWriter();
  CaptureWriter(const CaptureWriter&) = delete;
  CaptureWriter& operator=(const CaptureWriter&) = delete;
  // Creates (truncates) the file and writes the header; false with `why`.
  bool open(const std::string& path, std::string& why);
  // Buffered; after the first write error the capture stops and failed() is true.
  void append(std::span<const std::uint8_t> bytes, double receive_unix);
  void close();
  bool failed() const { return failed_; }
  std::uint64_t bytes_recorded() const { return bytes_; }

 private:
  std::FILE* file_ = nullptr;
  bool failed_ = false;
  std::uint64_t bytes_ = 0;
};

struct ReplayResult {
  bool ok = false;
  std::string error;          // when !ok: why the file could not be read at all
  std::uint64_t records = 0;
  std::uint64_t bytes = 0;
  bool truncated_tail = false;  // the last record was cut short
};

// Calls `chunk` for every record in order. Pure reading; no pacing.
ReplayResult read_capture(const std::string& path,
                          const std::function<void(std::span<const std::uint8_t>, double receive_unix)>& chunk);

}  // namespace accrue::daemon
