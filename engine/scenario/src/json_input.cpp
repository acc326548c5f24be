#include "droopline/json_input.hpp"

#include <cstring>
#include <string>

namespace droopline {
namespace {

using json = nlohmann::ordered_json;

// Builds the document as json::parse does, through the SAX interface (iterative: no recursion
// on the input's nesting), refusing to open a container past the depth limit and noting every
// key that repeats within one object (the JSON standard leaves duplicates undefined).
class DomBuilder {
 public:
  DomBuilder(std::size_t max_depth, const StreamedArray* streamed) : max_depth_(max_depth), streamed_(streamed) {}

  static constexpr std::size_t kMaxListed = 100;  // duplicate keys named; the rest are counted

  json root;
  std::vector<std::string> dups;  // each `"key"` and, below the root, ` in PATH` of its object
  std::size_t dup_count = 0;
  std::size_t error_byte = 0;
  std::string error_text;
  bool too_deep = false;

  bool null() { return put(json(nullptr)); }
  bool boolean(bool v) { return put(json(v)); }
  bool number_integer(json::number_integer_t v) { return put(json(v)); }
  bool number_unsigned(json::number_unsigned_t v) { return put(json(v)); }
  bool number_float(json::number_float_t v, const std::string&) { return put(json(v)); }
  bool string(std::string& v) { return put(json(std::move(v))); }
  bool binary(json::binary_t& v) { return put(json(std::move(v))); }
  bool start_object(std::size_t) { return open(json::object()); }
  bool start_array(std::size_t) { return open(json::array()); }
  bool end_object() { return close(); }
  bool end_array() { return close(); }
  bool key(std::string& k) {
    // One search of the object: a new key is appended at once (with a null value that the next
    // event replaces); a repeated one is noted and its slot receives the new value.
    auto& obj = stack_.back()->get_ref<json::object_t&>();
    streamed_key_ = streamed_ && stack_.size() == 1 && k == streamed_->key;
    if (obj.empty()) obj.reserve(8);  // most objects of a scenario have a few keys: one allocation
    auto it = obj.find(k);
    if (it != obj.end()) {
      ++dup_count;
      if (dups.size() < kMaxListed) dups.push_back("\"" + k + "\"" + (stack_.size() > 1 ? " in " + path_here() : ""));
      slot_ = &it->second;
    } else {
      obj.emplace_back(std::move(k), json());
      slot_ = &obj.back().second;
    }
    return true;
  }
  bool parse_error(std::size_t byte, const std::string&, const nlohmann::detail::exception& e) {
    error_byte = byte;
    error_text = e.what();
    return false;
  }

 private:
  json* insert(json&& v) {
    if (stack_.empty()) {
      root = std::move(v);
      return &root;
    }
    json& top = *stack_.back();
    if (top.is_array()) {
      top.get_ref<json::array_t&>().push_back(std::move(v));
      return &top.get_ref<json::array_t&>().back();
    }
    // An object's member goes to the slot its key made (see key()). A repeated key (reported as
    // an error) takes the new value, so a container opened under it is the one that receives its
    // members. The element stays put while it is open: its parent gets no new key until it is
    // closed.
    *slot_ = std::move(v);
    return slot_;
  }
  bool put(json&& v) {
    insert(std::move(v));
    hand_over();
    return true;
  }
  bool open(json&& v) {
    if (stack_.size() >= max_depth_) {
      too_deep = true;
      return false;
    }
    const bool streamed_array = streamed_key_ && stack_.size() == 1 && v.is_array();
    stack_.push_back(insert(std::move(v)));  // an open container gets no sibling until closed
    if (streamed_array) streaming_ = stack_.back();
    return true;
  }
  bool close() {
    if (stack_.back() == streaming_) streaming_ = nullptr;
    stack_.pop_back();
    hand_over();
    return true;
  }
  // Where the innermost open container sits, as `units[3].governor` (the scenario's own path
  // style): an open container is always its parent's last element or the value of one key.
  std::string path_here() const {
    std::string path;
    for (std::size_t i = 1; i < stack_.size(); ++i) {
      const json* parent = stack_[i - 1];
      if (parent->is_array()) {
        const std::size_t index = parent == streaming_ ? streamed_count_ : parent->size() - 1;
        path += "[" + std::to_string(index) + "]";
        continue;
      }
      for (const auto& [key, value] : parent->get_ref<const json::object_t&>())
        if (&value == stack_[i]) {
          (path += path.empty() ? "" : ".") += key;
          break;
        }
    }
    return path;
  }
  // A value just completed directly inside the streamed array leaves the document for `take`.
  void hand_over() {
    if (!streaming_ || stack_.back() != streaming_) return;
    auto& arr = streaming_->get_ref<json::array_t&>();
    streamed_->take(std::move(arr.back()), streamed_count_++);
    arr.pop_back();
  }

  std::size_t max_depth_;
  std::vector<json*> stack_;
  json* slot_ = nullptr;  // the value of the key just read in the innermost object
  const StreamedArray* streamed_;
  bool streamed_key_ = false;  // the key just read is the root's streamed member
  json* streaming_ = nullptr;  // the streamed array while it is open
  std::size_t streamed_count_ = 0;
};

// Byte offset of the bracket that opens level max_depth + 1 (outside strings), or the end.
std::size_t too_deep_at(std::string_view text, std::size_t max_depth) {
  std::size_t depth = 0;
  bool in_string = false, escaped = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (in_string) {
      if (escaped) escaped = false;
      else if (c == '\\') escaped = true;
      else if (c == '"') in_string = false;
    } else if (c == '"') {
      in_string = true;
    } else if (c == '{' || c == '[') {
      if (++depth > max_depth) return i;
    } else if ((c == '}' || c == ']') && depth > 0) {
      --depth;
    }
  }
  return text.size();
}

std::string line_column(std::string_view text, std::size_t offset) {
  std::size_t line = 1, col = 1;
  for (std::size_t i = 0; i < offset && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++line;
      col = 1;
    } else {
      ++col;
    }
  }
  return "line " + std::to_string(line) + ", column " + std::to_string(col);
}

}  // namespace

std::optional<json> parse_untrusted_json(std::string_view text, std::vector<Issue>& issues, const JsonLimits& limits) {
  return parse_untrusted_json(text, issues, limits, StreamedArray{});
}

std::optional<json> parse_untrusted_json(std::string_view text, std::vector<Issue>& issues, const JsonLimits& limits,
                                         const StreamedArray& streamed) {
  if (text.size() > limits.max_bytes) {
    issues.push_back({"json", "text of " + std::to_string(text.size()) + " bytes is longer than the limit of " +
                                  std::to_string(limits.max_bytes) + " bytes",
                      false});
    return std::nullopt;
  }
  // The parser stops at a NUL byte as if the text ended there: what follows would be ignored.
  if (const std::size_t nul = text.find('\0'); nul != std::string_view::npos) {
    issues.push_back({"json", line_column(text, nul) + ": a NUL byte, which JSON text cannot hold", false});
    return std::nullopt;
  }
  DomBuilder dom(limits.max_depth, streamed.take ? &streamed : nullptr);
  if (!json::sax_parse(text.begin(), text.end(), &dom)) {
    if (dom.too_deep) {
      issues.push_back({"json", line_column(text, too_deep_at(text, limits.max_depth)) +
                                    ": nested deeper than " + std::to_string(limits.max_depth) +
                                    " levels of objects and arrays",
                        false});
      return std::nullopt;
    }
    std::string what = dom.error_text;
    if (auto pos = what.find("syntax error"); pos != std::string::npos) what = what.substr(pos);
    issues.push_back({"json", line_column(text, dom.error_byte > 0 ? dom.error_byte - 1 : 0) + ": " + what, false});
    return std::nullopt;
  }
  for (const std::string& d : dom.dups) issues.push_back({"json", "duplicate key " + d, false});
  if (dom.dup_count > dom.dups.size())
    issues.push_back({"json", std::to_string(dom.dup_count - dom.dups.size()) + " more duplicate keys not listed", false});
  if (dom.dup_count > 0) return std::nullopt;
  return std::move(dom.root);
}

std::optional<json> parse_untrusted_json(std::string_view text, std::string& error, const JsonLimits& limits) {
  std::vector<Issue> issues;
  auto j = parse_untrusted_json(text, issues, limits);
  if (!j) error = issues.front().text();
  return j;
}

namespace detail {

std::size_t find_text(std::string_view text, std::string_view needle, std::size_t from) noexcept {
  if (from > text.size()) return std::string_view::npos;
  if (needle.empty()) return from;
  const void* at = memmem(text.data() + from, text.size() - from, needle.data(), needle.size());
  return at ? static_cast<std::size_t>(static_cast<const char*>(at) - text.data()) : std::string_view::npos;
}

}  // namespace detail

}  // namespace droopline
