#pragma once
/// The one gate for JSON that comes from outside the process (HTTP bodies, WebSocket messages,
/// scenario, requirement, journal and sweep files). Nothing walks an untrusted value (dump, copy,
/// compare, recursive read) before it has passed here: the parse itself is iterative, nesting
/// deeper than the limit and text longer than the limit are refused with where it happened, and
/// a key repeated within one object is an error rather than a silent last-one-wins.
#include <cstddef>
#include <functional>
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

/// An array member of the root object whose elements are handed over one by one as each is
/// complete, instead of being kept in the document: a large array (a fleet's units) is read
/// without its whole document in memory at once. The returned document holds that member as an
/// empty array. `take` receives each element (any JSON value) and its index; when the parse
/// fails (syntax, depth, a duplicate key anywhere, including inside an element already handed
/// over), whatever `take` built must be thrown away, as the text was not valid.
struct StreamedArray {
  std::string_view key;
  std::function<void(nlohmann::ordered_json&& element, std::size_t index)> take;
};

/// parse_untrusted_json with the root object's member `streamed.key` handed over element by
/// element (see StreamedArray). Errors and limits are those of the plain parse.
std::optional<nlohmann::ordered_json> parse_untrusted_json(std::string_view text, std::vector<Issue>& issues,
                                                           const JsonLimits& limits,
                                                           const StreamedArray& streamed);

namespace detail {
/// Where `needle` first occurs in `text` at or after `from`, or npos: the quick look into a
/// scenario's text before it is parsed. `std::string_view::find` stops at every occurrence of the
/// needle's first byte, and a JSON key starts with a quote, found every few bytes; this searches
/// the whole needle (glibc's memmem), some three times faster on a fleet's text.
std::size_t find_text(std::string_view text, std::string_view needle, std::size_t from = 0) noexcept;
}  // namespace detail

}  // namespace droopline
