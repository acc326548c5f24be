#pragma once
// One HTTP connection: reads requests under size and time limits, hands them to the API (the
// route table in api/), serves the page's files, and hands WebSocket upgrades of /api/v1/stream
// to a WebsocketSession. Only I/O, limits and the static files live here.
#include <functional>
#include <array>
#include <memory>
#include <optional>

#include "server.hpp"

namespace droopline::server {

class HttpSession : public std::enable_shared_from_this<HttpSession> {
 public:
  using HttpRequest = http::request<http::string_body>;
  using Response = http::response<http::string_body>;

  HttpSession(tcp::socket&& socket, Context& ctx, std::shared_ptr<void> slot);
  void run();

 private:
  void do_read();
  void on_header(beast::error_code ec, std::size_t bytes);
  /// Reads the rest of the request (its body) under the limit on_header set.
  void read_body();
  void on_read(beast::error_code ec, std::size_t bytes);
  void refuse_read(beast::error_code ec);
  /// Writes one response (string, file or empty body); one write in flight per connection.
  template <class Body>
  void send(http::response<Body> res);
  void on_write(bool keep_alive, beast::error_code ec, std::size_t bytes);
  /// Answers an error found while the request was still arriving, then reads and discards the
  /// rest for a bounded time and size before closing, so a client that sends its whole body
  /// before reading (Python's http.client does) gets the answer instead of a reset.
  void send_then_linger(Response res);
  void do_discard();
  void on_discard(beast::error_code ec, std::size_t bytes);
  /// One of the page's files, as StaticFiles::resolve decides (the only way to the disk).
  void serve_file(unsigned version, bool keep_alive, const std::string& path);
  void upgrade(HttpRequest&& req);
  /// Hands the request to the API's route table; what is not the API's is a page file.
  void handle(HttpRequest&& req);
  void dispatch(Request call, unsigned version, bool keep);  // to the API, else the page's files
  /// A refused token or join code (on a request or an upgrade): counted, logged, and `then` run a
  /// second later, so guessing costs a second a try and a place under the connection limits.
  void after_refusal(std::function<void()> then);
  /// Writes the API's reply (on this connection's strand).
  void answer(unsigned version, bool keep_alive, Reply reply);

  beast::tcp_stream stream_;
  Context& ctx_;
  std::shared_ptr<void> slot_;
  beast::flat_buffer buffer_;
  std::optional<http::request_parser<http::string_body>> parser_;
  std::size_t body_limit_ = 0;  // of the request being read (bytes), for the 413's message
  std::shared_ptr<void> writing_;  // the response being written (any body type)
  bool head_ = false;               // the request being answered is a HEAD
  bool linger_ = false;             // after this write: discard what the client still sends
  std::size_t discarded_ = 0;       // bytes discarded while lingering
  std::array<char, 16 * 1024> discard_buffer_{};
};

/// A JSON response with the common headers.
http::response<http::string_body> json_response(unsigned version, bool keep_alive, int status,
                                                std::string body);

}  // namespace droopline::server
