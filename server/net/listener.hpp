#pragma once
// Accepts connections on one endpoint and hands each to an HttpSession, up to
// the connection limit and the limit per client address (past either: a short
// 503 written without reading the request). Out of descriptors, it pauses
// accepting for 50 ms instead of spinning.
#include <memory>
#include <string>

#include "server.hpp"

namespace droopline::server {

class Listener : public std::enable_shared_from_this<Listener> {
 public:
  /// Opens, binds and listens; `ec` says why not.
  Listener(net::io_context& ioc, tcp::endpoint endpoint, Context& ctx, beast::error_code& ec);
  void run();
  void stop();
  unsigned short port() const;

 private:
  void do_accept();
  void on_accept(beast::error_code ec, tcp::socket socket);
  void refuse(tcp::socket socket, const std::string& why);

  net::io_context& ioc_;
  tcp::acceptor acceptor_;
  net::steady_timer retry_;
  Context& ctx_;
};

}  // namespace droopline::server
