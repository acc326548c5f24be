#include "http_target.hpp"

#include <cctype>

namespace droopline::server {

std::string percent_decode(std::string_view s, bool& ok) {
  std::string out;
  ok = true;
  for (std::size_t i = 0; i < s.size(); ++i) {
    if (s[i] == '%') {
      if (i + 2 >= s.size() || !std::isxdigit(static_cast<unsigned char>(s[i + 1])) ||
          !std::isxdigit(static_cast<unsigned char>(s[i + 2]))) {
        ok = false;
        return {};
      }
      out += static_cast<char>(std::stoi(std::string(s.substr(i + 1, 2)), nullptr, 16));
      i += 2;
    } else if (s[i] == '+') {
      out += ' ';
    } else {
      out += s[i];
    }
  }
  return out;
}

std::string Target::get(const std::string& key, const std::string& fallback) const {
  for (auto& [k, v] : query)
    if (k == key) return v;
  return fallback;
}

bool Target::has(const std::string& key) const {
  for (auto& [k, v] : query)
    if (k == key) return true;
  return false;
}

Target parse_target(std::string_view target) {
  Target t;
  const auto q = target.find('?');
  t.path = percent_decode(target.substr(0, q), t.ok);
  if (!t.ok || q == std::string_view::npos) return t;
  std::string_view rest = target.substr(q + 1);
  while (!rest.empty()) {
    const auto amp = rest.find('&');
    std::string_view part = rest.substr(0, amp);
    const auto eq = part.find('=');
    bool ok1 = true, ok2 = true;
    std::string k = percent_decode(part.substr(0, eq), ok1);
    std::string v = eq == std::string_view::npos ? "" : percent_decode(part.substr(eq + 1), ok2);
    if (!ok1 || !ok2) {
      t.ok = false;
      return t;
    }
    if (!k.empty()) t.query.emplace_back(std::move(k), std::move(v));
    if (amp == std::string_view::npos) break;
    rest = rest.substr(amp + 1);
  }
  return t;
}

}  // namespace droopline::server
