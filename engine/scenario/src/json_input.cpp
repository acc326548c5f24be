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

  // While an element of the streamed array is recorded (see JsonEvents), events go to the record.
  bool null() { return recording() ? record({Kind::null}) : put(json(nullptr)); }
  bool boolean(bool v) { return recording() ? record({Kind::boolean, v}) : put(json(v)); }
  bool number_integer(json::number_integer_t v) { return recording() ? record({Kind::integer, false, v}) : put(json(v)); }
  bool number_unsigned(json::number_unsigned_t v) {
    return recording() ? record({Kind::unsigned_integer, false, 0, v}) : put(json(v));
  }
  bool number_float(json::number_float_t v, const std::string&) {
    return recording() ? record({Kind::floating, false, 0, 0, v}) : put(json(v));
  }
  bool string(std::string& v) { return recording() ? record_text(Kind::string, v) : put(json(std::move(v))); }
  bool binary(json::binary_t& v) { return put(json(std::move(v))); }  // never from JSON text
  bool start_object(std::size_t) { return records() ? record_open(Kind::object) : open(json::object()); }
  bool start_array(std::size_t) { return records() ? record_open(Kind::array) : open(json::array()); }
  bool end_object() { return recording() ? record_close() : close(); }
  bool end_array() { return recording() ? record_close() : close(); }
  bool key(std::string& k) {
    if (recording()) return record_text(Kind::key, k);
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
  bool parse_error(std::size_t byte, const std::string& token, const nlohmann::detail::exception& e) {
    error_byte = byte;
    if (e.id == 406) {  // nlohmann's out_of_range.406: a number no double can hold
      const std::string shown = token.size() > 40 ? token.substr(0, 40) + "..." : token;
      error_text = "the number " + shown + " is beyond the range of a double (about 1.8e308 in magnitude)";
    } else {
      error_text = e.what();
    }
    return false;
  }

 private:
  using Kind = JsonEvents::Kind;

  // Events of an element longer than this are not kept: what was recorded is built into the
  // element's document and the rest goes there directly (a unit is some 40 events; a long array
  // inside an element would otherwise take several times the memory of its document).
  static constexpr std::size_t kMaxRecorded = 4096;

  // Whether the event at hand goes to the record of the element being recorded.
  bool recording() {
    if (recording_ == 0) return false;
    if (element_.events.size() < kMaxRecorded) return true;
    recording_ = 0;
    build_recorded();
    return false;
  }
  // A container opening directly inside the streamed array, when its elements are offered as
  // events first; or one opening inside such an element.
  bool records() {
    return recording() || (streaming_ && !replaying_ && stack_.back() == streaming_ && streamed_->read_events);
  }
  // The recorded events into the document, exactly as the parser would have built them
  // (duplicate keys noted); the element goes to `take` when it closes.
  void build_recorded() {
    replaying_ = true;
    for (const JsonEvents::Event& e : element_.events) replay(e);
    replaying_ = false;
  }
  bool record(JsonEvents::Event&& e) {
    element_.events.push_back(std::move(e));
    return true;
  }
  bool record_text(Kind kind, const std::string& text) {
    JsonEvents::Event e{kind};
    e.text_at = static_cast<std::uint32_t>(element_.text.size());
    e.text_size = static_cast<std::uint32_t>(text.size());
    element_.text += text;
    return record(std::move(e));
  }
  bool record_open(Kind kind) {
    if (recording_ == 0) {
      element_.events.clear();
      element_.text.clear();
    }
    if (stack_.size() + recording_ >= max_depth_) {  // the same limit as open() applies
      too_deep = true;
      return false;
    }
    ++recording_;
    return record({kind});
  }
  bool record_close() {
    record({Kind::close});
    if (--recording_ > 0) return true;
    if (streamed_->read_events(element_, streamed_count_)) {
      ++streamed_count_;
      return true;
    }
    build_recorded();  // declined
    return true;
  }
  void replay(const JsonEvents::Event& e) {
    switch (e.kind) {
      case Kind::null: put(json(nullptr)); break;
      case Kind::boolean: put(json(e.boolean)); break;
      case Kind::integer: put(json(e.integer)); break;
      case Kind::unsigned_integer: put(json(e.unsigned_integer)); break;
      case Kind::floating: put(json(e.floating)); break;
      case Kind::string: put(json(std::string(element_.text_of(e)))); break;
      case Kind::key: {
        std::string k(element_.text_of(e));
        key(k);
        break;
      }
      case Kind::object: open(json::object()); break;
      case Kind::array: open(json::array()); break;
      case Kind::close: close(); break;
    }
  }

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
  JsonEvents element_;         // the streamed element being recorded
  std::size_t recording_ = 0;  // containers of it open; 0: not recording
  bool replaying_ = false;     // building a declined element's document from its events
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
