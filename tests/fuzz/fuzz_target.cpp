// libFuzzer target: HTTP request targets (path and query) as the server decodes them.
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "http_target.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  const droopline::server::Target t = droopline::server::parse_target(text);
  if (t.ok && t.path.size() > text.size()) std::abort();  // decoding never grows the text
  (void)t.get("format");
  return 0;
}
