#pragma once
// One HTTP connection: reads requests under size and time limits, answers the API and static
// files, and hands WebSocket upgrades of /api/v1/stream to a WebsocketSession.
#include <memory>
#include <optional>

#include "server.hpp"

namespace droopline::server {

class HttpSession : public std::enable_shared_from_this<HttpSession> {
 public:
  using Request = http::request<http::string_body>;
  using Response = http::response<http::string_body>;

  HttpSession(tcp::socket&& socket, Context& ctx, std::shared_ptr<void> slot);
  void run();

 private:
  void do_read();
  void on_read(beast::error_code ec, std::size_t bytes);
  void send(Response res);
  void on_write(bool keep_alive, beast::error_code ec, std::size_t bytes);
  void upgrade(Request&& req);
  void handle(Request&& req);
  /// Answers later, from any thread: the reply is carried back to this connection's strand.
  std::function<void(int, std::string)> later(const Request& req);

  beast::tcp_stream stream_;
  Context& ctx_;
  std::shared_ptr<void> slot_;
  beast::flat_buffer buffer_;
  std::optional<http::request_parser<http::string_body>> parser_;
  std::shared_ptr<Response> writing_;
};

/// A JSON response with the common headers.
http::response<http::string_body> json_response(unsigned version, bool keep_alive, int status,
                                                std::string body);

}  // namespace droopline::server
