#include "protocol/line_codec.hpp"

#include <charconv>
#include <cstdio>

#include "protocol/crc32.hpp"
#include "protocol/frame.hpp"

namespace accrue::protocol {
namespace {

std::vector<std::string_view> split(std::string_view s) {
  std::vector<std::string_view> parts;
  std::size_t i = 0;
  while (i < s.size()) {
    while (i < s.size() && (s[i] == ' ' || s[i] == '\t')) ++i;
    const std::size_t start = i;
    while (i < s.size() && s[i] != ' ' && s[i] != '\t') ++i;
    if (i > start) parts.push_back(s.substr(start, i - start));
  }
  return parts;
}

template <class T>
bool number(std::string_view s, T& out) {
  if (s.empty()) return false;
  const char* first = s.data();
  if constexpr (std::is_unsigned_v<T>) {
    if (*first == '+' || *first == '-') return false;
  }
  const auto [ptr, ec] = std::from_chars(first, s.data() + s.size(), out);
  return ec == std::errc() && ptr == s.data() + s.size();
}

template <class T>
bool bounded(std::string_view s, T& out, long long lo, long long hi) {
  long long v = 0;
  if (!number(s, v) || v < lo || v > hi) return false;
  out = T(v);
  return true;
}

bool is_crc_field(std::string_view f) {
  if (f.size() != 9 || f[0] != '*') return false;
  for (char c : f.substr(1))
    if (!((c >= '0' && c <= '9') || (c >= 'A' && c <= 'F') || (c >= 'a' && c <= 'f'))) return false;
  return true;
}

std::string hex8(std::uint32_t v) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "%08X", v);
  return buf;
}

std::string real(double v) {
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.17g", v);
  return buf;
}

}  // namespace

std::optional<Message> parse_line(std::string_view line) {
  const auto f = split(line);
  if (f.empty()) return std::nullopt;
  if (f[0] == "id") {
    if (f.size() != 7 && f.size() != 8 && f.size() != 11) return std::nullopt;
    BoardIdentity m;
    if (!number(f[1], m.board_serial) || !bounded(f[2], m.firmware_version, 0, 0xFFFF) ||
        !bounded(f[3], m.channel_count, 1, 255) || !bounded(f[4], m.adc_bits, 2, 24) || !number(f[5], m.full_scale_v) ||
        !number(f[6], m.sample_period_s))
      return std::nullopt;
    if (!(m.full_scale_v > 0.0) || !(m.sample_period_s > 0.0)) return std::nullopt;
    m.capabilities = capability_bit::bipolar_adc;  // the common case for simple boards
    if (f.size() >= 8 && !bounded(f[7], m.capabilities, 0, 255)) return std::nullopt;
    if (f.size() == 11 && !(number(f[8], m.r1_ohm) && number(f[9], m.c_farad) && number(f[10], m.r2_ohm)))
      return std::nullopt;
    return m;
  }
  if (f[0] == "ev") {
    BoardEvent m;
    if (f.size() != 5 || !bounded(f[1], m.kind, 1, 7) || !bounded(f[2], m.channel, 0, 255) ||
        !number(f[3], m.sample_index) || !number(f[4], m.value))
      return std::nullopt;
    return m;
  }
  if (f[0] == "ack") {
    CommandAck m;
    if (f.size() != 3 || !bounded(f[1], m.request_id, 0, 0xFFFF) || !bounded(f[2], m.status, 0, 3)) return std::nullopt;
    return m;
  }
  if (f[0] == "cmd") {
    BoardCommand m;
    if (f.size() != 4 || !bounded(f[1], m.request_id, 0, 0xFFFF) || !bounded(f[2], m.op, 1, 5) ||
        !number(f[3], m.argument))
      return std::nullopt;
    return m;
  }
  // A sample line: index, one code per channel, optional status "s<bits>" last.
  SampleBlock m;
  if (!number(f[0], m.first_index)) return std::nullopt;
  std::size_t n_codes = f.size() - 1;
  if (n_codes > 0 && f.back().size() > 1 && f.back()[0] == 's') {
    if (!bounded(f.back().substr(1), m.status, 0, 255)) return std::nullopt;
    --n_codes;
  }
  if (n_codes < 1 || n_codes > 255) return std::nullopt;
  m.channel_count = std::uint8_t(n_codes);
  m.samples_per_channel = 1;
  m.codes.resize(n_codes);
  for (std::size_t c = 0; c < n_codes; ++c)
    if (!bounded(f[1 + c], m.codes[c], -(1 << 23), (1 << 23) - 1)) return std::nullopt;
  return m;
}

void LineDecoder::finish_line(std::vector<Message>& out, std::size_t out_start) {
  const std::size_t raw_bytes = line_.size() + 1;  // with its LF
  std::string_view body(line_);
  if (!body.empty() && body.back() == '\r') body.remove_suffix(1);
  auto bad = [&](std::uint64_t& counter) {
    ++counter;
    counters_.discarded_bytes += raw_bytes;
  };
  std::size_t lead = 0;
  while (lead < body.size() && (body[lead] == ' ' || body[lead] == '\t')) ++lead;
  if (lead == body.size() || body[lead] == '#') {
    ++counters_.comments;
    counters_.accepted_bytes += raw_bytes;
    return;
  }
  // Optional checksum: " *XXXXXXXX" at the end, CRC-32/ISO-HDLC of everything before the space.
  const std::size_t star = body.rfind(" *");
  if (star != std::string_view::npos && is_crc_field(body.substr(star + 1))) {
    std::uint32_t want = 0;
    std::from_chars(body.data() + star + 2, body.data() + body.size(), want, 16);
    const auto text = body.substr(0, star);
    const auto got = crc32_iso_hdlc(std::span(reinterpret_cast<const std::uint8_t*>(text.data()), text.size()));
    if (got != want) return bad(counters_.bad_checksum);
    body = text;
  }
  auto m = parse_line(body);
  if (!m) return bad(counters_.bad_lines);
  ++counters_.lines_ok;
  counters_.accepted_bytes += raw_bytes;
  if (auto* s = std::get_if<SampleBlock>(&*m); s && out.size() > out_start) {
    if (auto* prev = std::get_if<SampleBlock>(&out.back());
        prev && prev->channel_count == s->channel_count && prev->status == s->status &&
        prev->first_index + prev->samples_per_channel == s->first_index &&
        prev->codes.size() + s->codes.size() <= frame::kMaxSamplesPerBlock) {
      prev->codes.insert(prev->codes.end(), s->codes.begin(), s->codes.end());
      ++prev->samples_per_channel;
      return;
    }
  }
  out.push_back(std::move(*m));
}

void LineDecoder::feed(std::span<const std::uint8_t> bytes, std::vector<Message>& out) {
  counters_.bytes_in += bytes.size();
  const std::size_t out_start = out.size();
  for (std::uint8_t b : bytes) {
    if (skipping_) {
      ++counters_.discarded_bytes;
      if (b == '\n') skipping_ = false;
      continue;
    }
    if (b == '\n') {
      finish_line(out, out_start);
      line_.clear();
      continue;
    }
    if (line_.size() >= kMaxLineBytes) {
      ++counters_.oversize_lines;
      counters_.discarded_bytes += line_.size() + 1;
      line_.clear();
      skipping_ = true;
      continue;
    }
    line_.push_back(char(b));
  }
}

void LineDecoder::reset() {
  counters_.discarded_bytes += line_.size();
  line_.clear();
  skipping_ = false;
}

std::string encode_line(const Message& message, bool with_checksum) {
  std::vector<std::string> lines;
  if (auto* m = std::get_if<BoardIdentity>(&message)) {
    lines.push_back("id " + std::to_string(m->board_serial) + " " + std::to_string(m->firmware_version) + " " +
                    std::to_string(m->channel_count) + " " + std::to_string(m->adc_bits) + " " + real(m->full_scale_v) +
                    " " + real(m->sample_period_s) + " " + std::to_string(m->capabilities) + " " + real(m->r1_ohm) +
                    " " + real(m->c_farad) + " " + real(m->r2_ohm));
  } else if (auto* m = std::get_if<BoardEvent>(&message)) {
    lines.push_back("ev " + std::to_string(int(m->kind)) + " " + std::to_string(m->channel) + " " +
                    std::to_string(m->sample_index) + " " + std::to_string(m->value));
  } else if (auto* m = std::get_if<CommandAck>(&message)) {
    lines.push_back("ack " + std::to_string(m->request_id) + " " + std::to_string(int(m->status)));
  } else if (auto* m = std::get_if<BoardCommand>(&message)) {
    lines.push_back("cmd " + std::to_string(m->request_id) + " " + std::to_string(int(m->op)) + " " +
                    std::to_string(m->argument));
  } else if (auto* m = std::get_if<SampleBlock>(&message)) {
    if (m->channel_count == 0 || m->codes.size() != std::size_t(m->channel_count) * m->samples_per_channel) return {};
    for (std::size_t s = 0; s < m->samples_per_channel; ++s) {
      std::string l = std::to_string(m->first_index + s);
      for (std::size_t c = 0; c < m->channel_count; ++c) l += " " + std::to_string(m->codes[s * m->channel_count + c]);
      if (m->status) l += " s" + std::to_string(m->status);
      lines.push_back(std::move(l));
    }
  }
  std::string out;
  for (auto& l : lines) {
    if (with_checksum)
      l += " *" + hex8(crc32_iso_hdlc(std::span(reinterpret_cast<const std::uint8_t*>(l.data()), l.size())));
    out += l;
    out += '\n';
  }
  return out;
}

}  // namespace accrue::protocol
