#pragma once
// The result of an operation at an I/O edge: ok, or an error with the SQLite
// (or errno) code and a message that says what failed. Never thrown.
#include <string>
#include <utility>

namespace accrue::storage {

struct Status {
  int code = 0;  // 0 = ok; otherwise an SQLite result code
  std::string message;
  bool ok() const { return code == 0; }
  static Status success() { return {}; }
  static Status error(int code, std::string message) { return {code == 0 ? 1 : code, std::move(message)}; }
};

}  // namespace accrue::storage
