#pragma once
// Request targets: the path and query of an HTTP request line, percent-decoded.
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace droopline::server {

/// A decoded request target. `ok` is false on malformed percent-encoding.
struct Target {
  std::string path;
  std::vector<std::pair<std::string, std::string>> query;
  bool ok = true;
  /// The first value of `key`, or `fallback`.
  std::string get(const std::string& key, const std::string& fallback = "") const;
  /// True when the query names `key`.
  bool has(const std::string& key) const;
};

/// Decodes %XX and '+' (in the query); `ok` false on a malformed escape.
std::string percent_decode(std::string_view s, bool& ok);
/// Splits and decodes a request target such as `/api/v1/history?from_s=0&format=csv`.
Target parse_target(std::string_view target);

}  // namespace droopline::server
