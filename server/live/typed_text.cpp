#include "typed_text.hpp"

namespace droopline {

std::string cut_utf8(std::string text, std::size_t max) {
  if (text.size() <= max) return text;
  std::size_t end = max;
  while (end > 0 && (static_cast<unsigned char>(text[end]) & 0xC0) == 0x80) --end;
  text.resize(end);
  return text;
}

std::optional<std::string> typed_text(std::string_view text, const TypedTextRule& rule, std::string& error) {
  const std::string field = rule.field;
  auto space = [](char c) { return c == ' ' || c == '\t' || c == '\n' || c == '\r'; };
  while (!text.empty() && space(text.front())) text.remove_prefix(1);
  while (!text.empty() && space(text.back())) text.remove_suffix(1);
  if (text.empty()) {
    error = field + ": required, at least one character that is not a space";
    return std::nullopt;
  }
  if (text.size() > rule.refuse_over) {
    error = field + ": at most " + std::to_string(rule.refuse_over) + " bytes, got " + std::to_string(text.size());
    return std::nullopt;
  }
  for (std::size_t i = 0; i < text.size(); ++i) {
    const auto c = static_cast<unsigned char>(text[i]);
    // C0 controls and DEL; the JSON gate has already refused invalid UTF-8.
    const bool control = c < 0x20 || c == 0x7F;
    if (control && !(rule.line_breaks && (c == '\n' || c == '\t' || c == '\r'))) {
      error = field + ": control character (code " + std::to_string(c) + ") at byte " + std::to_string(i) +
              (rule.line_breaks ? "; only line breaks and tabs are allowed" : "; a single line of text is expected");
      return std::nullopt;
    }
  }
  return cut_utf8(std::string(text), rule.keep_bytes);
}

}  // namespace droopline
