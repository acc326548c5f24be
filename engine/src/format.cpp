#include "droopline/format.hpp"

#include <charconv>
#include <cmath>
#include <cstdio>

namespace droopline {

std::string fmt_num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.6g", v);
  return buf;
}

std::string fmt_fixed(double v, int decimals) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, v);
  return buf;
}

void append_exact(std::string& out, double v) {
  char buf[32];
  auto res = std::to_chars(buf, buf + sizeof buf, v);
  out.append(buf, res.ptr);
}

void append_json_number(std::string& out, double v) {
  if (std::isfinite(v))
    append_exact(out, v);
  else
    out += "null";
}

void append_json_string(std::string& out, std::string_view text) {
  out += '"';
  for (const char c : text) {
    if (c == '"' || c == '\\') {
      out += '\\';
      out += c;
    } else if (static_cast<unsigned char>(c) < 0x20) {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\u%04x", static_cast<unsigned>(static_cast<unsigned char>(c)));
      out += buf;
    } else {
      out += c;
    }
  }
  out += '"';
}

std::string fmt_exact(double v) {
  std::string s;
  append_exact(s, v);
  return s;
}

std::string clip_text(std::string_view text, std::size_t max) {
  if (text.size() <= max) return std::string(text);
  return std::string(text.substr(0, max)) + "... (" + std::to_string(text.size() - max) + " more characters)";
}

}  // namespace droopline
