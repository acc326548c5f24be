#include "static_files.hpp"

#include <algorithm>
#include <array>
#include <vector>

namespace droopline::server {
namespace fs = std::filesystem;

namespace {

// The only characters a served name may hold: what the page's and uPlot's file names use.
bool name_char(char c) {
  return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '.' ||
         c == '_' || c == '-';
}

constexpr std::array<std::string_view, 8> kPageExtensions{".html", ".js", ".mjs", ".css", ".json",
                                                          ".svg", ".png", ".ico"};
// Files in the root that are the build's, not the page's.
constexpr std::array<std::string_view, 2> kNotServed{"package.json", "package-lock.json"};

bool has_page_extension(std::string_view name) {
  return std::any_of(kPageExtensions.begin(), kPageExtensions.end(), [&](std::string_view ext) {
    return name.size() > ext.size() && name.substr(name.size() - ext.size()) == ext;
  });
}

// True when `p` is `root` or below it, comparing whole components of canonical paths.
bool under(const fs::path& root, const fs::path& p) {
  auto r = root.begin(), q = p.begin();
  for (; r != root.end(); ++r, ++q)
    if (q == p.end() || *r != *q) return false;
  return true;
}

StaticFiles::Lookup refuse(int status, std::string why) { return {status, {}, std::move(why)}; }

}  // namespace

StaticFiles::StaticFiles(const fs::path& web_root) {
  std::error_code ec;
  root_ = fs::canonical(web_root, ec);
  if (ec) root_.clear();
}

StaticFiles::Lookup StaticFiles::resolve(std::string_view path) const {
  if (path.size() > kMaxPathChars) return refuse(414, "path longer than 512 characters");
  if (path.empty() || path.front() != '/') return refuse(400, "a path must begin with '/'");
  if (path == "/") path = "/index.html";
  // Split after the leading '/', every segment checked before anything touches the disk.
  std::vector<std::string_view> parts;
  for (std::size_t pos = 1;;) {
    const std::size_t slash = path.find('/', pos);
    const std::string_view part = path.substr(pos, slash == std::string_view::npos ? slash : slash - pos);
    if (part.empty()) return refuse(404, "empty path segment");
    if (part.front() == '.') return refuse(404, "hidden or relative segment");
    if (!std::all_of(part.begin(), part.end(), name_char)) return refuse(404, "characters outside [A-Za-z0-9._-]");
    parts.push_back(part);
    if (slash == std::string_view::npos) break;
    pos = slash + 1;
  }
  const bool page_file = parts.size() == 1 && has_page_extension(parts[0]) &&
                         std::find(kNotServed.begin(), kNotServed.end(), parts[0]) == kNotServed.end();
  const bool uplot_file = parts.size() == 4 && parts[0] == "node_modules" && parts[1] == "uplot" &&
                          parts[2] == "dist";
  if (!page_file && !uplot_file) return refuse(404, "not one of the page's files");
  if (root_.empty()) return refuse(404, "the web root is missing");

  fs::path file = root_;
  for (std::string_view part : parts) file /= fs::path(std::string(part));
  std::error_code ec;
  fs::path real = fs::canonical(file, ec);  // follows every link: what would really be opened
  if (ec) return refuse(404, "no such file");
  if (!under(root_, real)) return refuse(404, "resolves outside the web root");
  if (!fs::is_regular_file(real, ec) || ec) return refuse(404, "not a regular file");
  return {200, std::move(real), {}};
}

const char* content_type_of(const fs::path& p) {
  const std::string ext = p.extension().string();
  if (ext == ".html") return "text/html; charset=utf-8";
  if (ext == ".js" || ext == ".mjs") return "text/javascript; charset=utf-8";
  if (ext == ".css") return "text/css; charset=utf-8";
  if (ext == ".json" || ext == ".map") return "application/json";
  if (ext == ".svg") return "image/svg+xml";
  if (ext == ".png") return "image/png";
  if (ext == ".ico") return "image/x-icon";
  if (ext == ".txt") return "text/plain; charset=utf-8";
  return "application/octet-stream";
}

}  // namespace droopline::server
