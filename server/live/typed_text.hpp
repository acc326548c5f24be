#pragma once
// Text a person typed (a trainee's name, an instructor's note), checked once at the boundary so
// that the journal, the records and the page get the same clean string.
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

namespace droopline {

/// `text` cut to at most `max` bytes, never inside a UTF-8 character.
std::string cut_utf8(std::string text, std::size_t max);

/// The rules for one typed field.
struct TypedTextRule {
  const char* field;         ///< its name in error messages ("name", "text")
  std::size_t keep_bytes;    ///< longer text is cut to this (at a character's start)
  std::size_t refuse_over;   ///< longer than this (after trimming) is refused, not cut
  bool line_breaks = false;  ///< newlines and tabs allowed (a note), else every control character refused
};

/// `text` trimmed of surrounding white space and checked against `rule`; nullopt with `error`
/// ("name: ...") when it is empty, too long or holds a control character.
std::optional<std::string> typed_text(std::string_view text, const TypedTextRule& rule, std::string& error);

/// A trainee's name: 1..60 bytes kept; more than 240 is not a name.
inline constexpr TypedTextRule kTraineeName{"name", 60, 240, false};
/// An instructor's note: 1..4000 bytes, line breaks allowed.
inline constexpr TypedTextRule kNoteText{"text", 4000, 4000, true};

}  // namespace droopline
