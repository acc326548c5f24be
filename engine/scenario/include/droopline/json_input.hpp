#pragma once
/// The one gate for JSON that comes from outside the process (HTTP bodies, WebSocket messages,
/// scenario, requirement, journal and sweep files). Nothing walks an untrusted value (dump, copy,
/// compare, recursive read) before it has passed here: the parse itself is iterative, nesting
/// deeper than the limit and text longer than the limit are refused with where it happened, and
/// a key repeated within one object is an error rather than a silent last-one-wins.
#include <cstddef>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
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

/// One element of a streamed array as the parser's events, in order: a record reused for every
/// element, so that a reader can take a well-formed element without a document being built for it.
struct JsonEvents {
  enum class Kind : std::uint8_t { null, boolean, integer, unsigned_integer, floating, string, key, object, array, close };
  struct Event {
    Kind kind;
    bool boolean = false;
    std::int64_t integer = 0;
    std::uint64_t unsigned_integer = 0;
    double floating = 0.0;
    std::uint32_t text_at = 0, text_size = 0;  ///< a string's or key's bytes in `text`
  };
  std::vector<Event> events;
  std::string text;  ///< the strings and keys, back to back

  std::string_view text_of(const Event& e) const { return std::string_view(text).substr(e.text_at, e.text_size); }
  /// A number event's value as a double, as nlohmann's get<double>() gives it.
  static double number(const Event& e) {
    return e.kind == Kind::floating  ? e.floating
           : e.kind == Kind::integer ? static_cast<double>(e.integer)
                                     : static_cast<double>(e.unsigned_integer);
  }
  static bool is_number(const Event& e) {
    return e.kind == Kind::integer || e.kind == Kind::unsigned_integer || e.kind == Kind::floating;
  }
};

/// An array member of the root object whose elements are handed over one by one as each is
/// complete, instead of being kept in the document: a large array (a fleet's units) is read
/// without its whole document in memory at once. The returned document holds that member as an
/// empty array. `take` receives each element (any JSON value) and its index; when the parse
/// fails (syntax, depth, a duplicate key anywhere, including inside an element already handed
/// over), whatever `take` built must be thrown away, as the text was not valid.
struct StreamedArray {
  std::string_view key;
  std::function<void(nlohmann::ordered_json&& element, std::size_t index)> take;
  /// Optional: offered each element that is an object or array, as its events, before any
  /// document is built for it. Returns true when it has taken the element; false hands it to
  /// `take` as a document instead. It must decline any element with a key repeated within one
  /// of its objects (the gate's duplicate check runs on the document), and in practice anything
  /// it would have a problem to report about, so that problems are reported in one place.
  std::function<bool(const JsonEvents& element, std::size_t index)> read_events;
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
