#include "daemon/capture.hpp"

#include <cstring>
#include <vector>

#include "protocol/byte_order.hpp"

namespace accrue::daemon {
namespace {

constexpr char kMagic[] = "ACCRUE-CAPTURE\n";
constexpr std::size_t kMagicSize = sizeof kMagic - 1;
constexpr std::uint32_t kVersion = 1;
constexpr std::uint32_t kMaxRecord = 1u << 20;

}  // namespace

CaptureWriter::~CaptureWriter() { close(); }

bool CaptureWriter::open(const std::string& path, std::string& why) {
  file_ = std::fopen(path.c_str(), "wb");
  if (!file_) {
    why = "cannot create capture " + path + ": " + std::strerror(errno);
    return false;
  }
  std::vector<std::uint8_t> header(kMagic, kMagic + kMagicSize);
  protocol::wire::put_u32(header, kVersion);
  if (std::fwrite(header.data(), 1, header.size(), file_) != header.size()) {
    why = "cannot write capture " + path + ": " + std::strerror(errno);
    close();
    return false;
  }
  return true;
}

void CaptureWriter::append(std::span<const std::uint8_t> bytes, double receive_unix) {
  if (!file_ || failed_ || bytes.empty()) return;
  for (std::size_t at = 0; at < bytes.size(); at += kMaxRecord) {
    const std::size_t n = std::min<std::size_t>(kMaxRecord, bytes.size() - at);
    std::vector<std::uint8_t> head;
    protocol::wire::put_f64(head, receive_unix);
    protocol::wire::put_u32(head, std::uint32_t(n));
    if (std::fwrite(head.data(), 1, head.size(), file_) != head.size() ||
        std::fwrite(bytes.data() + at, 1, n, file_) != n) {
      failed_ = true;
      return;
    }
    bytes_ += n;
  }
}

void CaptureWriter::close() {
  if (file_) {
    if (std::fclose(file_) != 0) failed_ = true;
    file_ = nullptr;
  }
}

ReplayResult read_capture(const std::string& path,
                          const std::function<void(std::span<const std::uint8_t>, double)>& chunk) {
  ReplayResult r;
  std::FILE* f = std::fopen(path.c_str(), "rb");
  if (!f) {
    r.error = "cannot open capture " + path + ": " + std::strerror(errno);
    return r;
  }
  std::uint8_t header[kMagicSize + 4];
  if (std::fread(header, 1, sizeof header, f) != sizeof header || std::memcmp(header, kMagic, kMagicSize) != 0) {
    std::fclose(f);
    r.error = path + " is not an accrue capture";
    return r;
  }
  const std::uint32_t version = protocol::wire::get_u32(std::span<const std::uint8_t>(header), kMagicSize);
  if (version != kVersion) {
    std::fclose(f);
    r.error = path + ": capture format version " + std::to_string(version) + " is not supported";
    return r;
  }
  std::vector<std::uint8_t> data;
  for (;;) {
    std::uint8_t head[12];
    const std::size_t got = std::fread(head, 1, sizeof head, f);
    if (got == 0) break;
    if (got != sizeof head) {
      r.truncated_tail = true;
      break;
    }
    const std::span<const std::uint8_t> h(head);
    const double t = protocol::wire::get_f64(h, 0);
    const std::uint32_t n = protocol::wire::get_u32(h, 8);
    if (n == 0 || n > kMaxRecord) {
      std::fclose(f);
      r.error = path + ": record " + std::to_string(r.records + 1) + " has an impossible length " + std::to_string(n);
      return r;
    }
    data.resize(n);
    if (std::fread(data.data(), 1, n, f) != n) {
      r.truncated_tail = true;
      break;
    }
    chunk(data, t);
    ++r.records;
    r.bytes += n;
  }
  std::fclose(f);
  r.ok = true;
  return r;
}

}  // namespace accrue::daemon
