#pragma once
/// Number formatting shared by messages and files.
#include <string>
#include <string_view>

namespace droopline {

/// Up to 6 significant digits, no trailing zeros: for messages (`-0.05`, `1e+10`).
std::string fmt_num(double v);
/// Fixed number of decimals: for totals in messages (`fmt_fixed(912.04, 1)` = `912.0`).
std::string fmt_fixed(double v, int decimals);
/// Shortest text that reads back to the same double: for series and summaries (`nan` never occurs).
std::string fmt_exact(double v);
/// `text` cut to at most `max` characters, with how much was left out; for messages that quote
/// what a client sent.
std::string clip_text(std::string_view text, std::size_t max = 300);
/// Appends fmt_exact(v) to out without a temporary string.
void append_exact(std::string& out, double v);
/// As append_exact, but `null` for a value JSON cannot hold (infinity, NaN).
void append_json_number(std::string& out, double v);
/// Appends `text` as a JSON string, quotes included: `"` and `\` escaped, control characters as
/// \u00XX, everything else (UTF-8 included) as it is.
void append_json_string(std::string& out, std::string_view text);

}  // namespace droopline
