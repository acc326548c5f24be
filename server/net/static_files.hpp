#pragma once
// The page's static files: which request paths may be served, resolved to a file that is proven
// to lie under the web root. Nothing else on the machine is reachable through this route.
#include <filesystem>
#include <string>
#include <string_view>

namespace droopline::server {

/// Resolves request paths to the page's files under one web root, fixed at construction.
class StaticFiles {
 public:
  /// Outcome of a lookup: a file to serve (status 200) or a refusal with its status and reason.
  struct Lookup {
    int status = 404;                ///< 200, 400 (malformed), 404 (not served), 414 (too long)
    std::filesystem::path file;      ///< canonical path of the file when status is 200
    std::string error;               ///< why it was refused
  };

  /// Longest decoded request path considered (characters).
  static constexpr std::size_t kMaxPathChars = 512;

  /// `web_root` is made canonical once; a root that does not exist serves nothing.
  explicit StaticFiles(const std::filesystem::path& web_root);

  /// Resolves a percent-decoded request path ("/", "/app.js", "/node_modules/uplot/dist/uPlot.esm.js").
  /// Served: the page's own files (regular files directly in the root, not the npm manifests) and
  /// uPlot's distribution files; nothing absolute, hidden, nested elsewhere, or outside the root
  /// once symbolic links are followed.
  Lookup resolve(std::string_view decoded_path) const;

  /// The canonical root ("" when it does not exist).
  const std::filesystem::path& root() const { return root_; }

 private:
  std::filesystem::path root_;
};

/// The Content-Type for a served file, from its extension.
const char* content_type_of(const std::filesystem::path& file);

}  // namespace droopline::server
