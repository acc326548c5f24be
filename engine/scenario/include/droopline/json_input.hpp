#pragma once
/// The one gate for JSON that comes from outside the process (HTTP bodies, WebSocket messages,
/// scenario, requirement, journal and sweep files). Nothing walks an untrusted value (dump, copy,
/// compare, recursive read) before it has passed here: the parse itself is iterative, nesting
/// deeper than the limit and text longer than the limit are refused with where it happened, and
/// a key repeated within one object is an error rather than a silent last-one-wins.
#include <cstddef>
#include <optional>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "droopline/validate.hpp"

namespace droopline {

struct JsonLimits {
  std::size_t max_depth = 64;          ///< objects and arrays open at once
  std::size_t max_bytes = 256u << 20;  ///< length of the text
};

/// Parses untrusted text. On failure appends one error (path "json": line, column and what) and
/// returns nothing; duplicate keys add one error each.
std::optional<nlohmann::ordered_json> parse_untrusted_json(std::string_view text, std::vector<Issue>& issues,
                                                           const JsonLimits& limits = {});

/// The same, reporting the first problem as one `json: ...` text (for a single error message).
std::optional<nlohmann::ordered_json> parse_untrusted_json(std::string_view text, std::string& error,
                                                           const JsonLimits& limits = {});

}  // namespace droopline
