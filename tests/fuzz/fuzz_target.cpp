// libFuzzer target: an HTTP request target (path and query) as the server decodes it, then the
// whole path-to-file resolution of the static route against a web root laid out like the real
// one plus traps: a secret next to the root and symbolic links inside it that point out. Aborts
// when a decoded path grows, or when a path the resolver accepts is not a regular file strictly
// under the canonical root, or is one of the traps.
#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>
#include <string_view>

#include "http_target.hpp"
#include "static_files.hpp"

namespace fs = std::filesystem;

namespace {

struct Root {
  fs::path dir, web, secret;
  droopline::server::StaticFiles files;
  static fs::path make() {
    const fs::path dir = fs::temp_directory_path() / ("droopline-fuzz-web-" + std::to_string(::getpid()));
    const fs::path web = dir / "web";
    fs::create_directories(web / "node_modules" / "uplot" / "dist");
    fs::create_directories(web / "node_modules" / "other");
    fs::create_directories(web / "sub");
    for (const char* f : {"index.html", "app.js", "style.css", "openapi.json", "package.json", ".hidden.js",
                          "node_modules/uplot/dist/uPlot.esm.js", "node_modules/uplot/dist/uPlot.min.css",
                          "node_modules/uplot/package.json", "node_modules/other/index.js", "sub/inner.js"})
      std::ofstream(web / f) << "page file\n";
    std::ofstream(dir / "secret.txt") << "SECRET\n";
    std::error_code ec;
    fs::create_symlink(dir / "secret.txt", web / "leak.js", ec);
    fs::create_symlink("../../../../secret.txt", web / "node_modules" / "uplot" / "dist" / "leak.js", ec);
    fs::create_symlink("/etc/passwd", web / "node_modules" / "uplot" / "dist" / "passwd.js", ec);
    fs::create_directory_symlink(dir, web / "node_modules" / "uplot" / "dist" / "up", ec);
    fs::create_directory_symlink("/", web / "root.js", ec);
    return web;
  }
  Root() : web(make()), files(web) {
    dir = web.parent_path();
    secret = fs::canonical(dir / "secret.txt");
  }
  ~Root() {
    std::error_code ec;
    fs::remove_all(dir, ec);
  }
};

Root& root() {
  static Root r;
  return r;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  const droopline::server::Target t = droopline::server::parse_target(text);
  if (t.ok && t.path.size() > text.size()) std::abort();  // decoding never grows the text
  (void)t.get("format");
  if (!t.ok) return 0;
  Root& r = root();
  const auto found = r.files.resolve(t.path);
  if (found.status != 200) return 0;
  // Accepted: must be a regular file, its own canonical path, strictly under the canonical root,
  // and none of the traps.
  const fs::path& file = found.file;
  const std::string under = r.files.root().string() + "/";
  if (file.string().compare(0, under.size(), under) != 0) std::abort();
  std::error_code ec;
  if (fs::canonical(file, ec) != file || ec) std::abort();
  if (!fs::is_regular_file(file, ec)) std::abort();
  if (file == r.secret || file.filename() == ".hidden.js" || file.filename() == "package.json" ||
      file.string().find("/node_modules/other/") != std::string::npos || file.string().find("/sub/") != std::string::npos)
    std::abort();
  return 0;
}
