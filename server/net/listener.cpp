#include "listener.hpp"

#include <spdlog/spdlog.h>

#include "http_session.hpp"

namespace droopline::server {
namespace {

// Holds one place under the connection limit for as long as a session keeps it.
std::shared_ptr<void> take_slot(Context& ctx) {
  ctx.counters.connections.fetch_add(1);
  return std::shared_ptr<void>(nullptr, [&ctx](void*) { ctx.counters.connections.fetch_sub(1); });
}

}  // namespace

Listener::Listener(net::io_context& ioc, tcp::endpoint endpoint, Context& ctx, beast::error_code& ec)
    : ioc_(ioc), acceptor_(net::make_strand(ioc)), retry_(acceptor_.get_executor()), ctx_(ctx) {
  acceptor_.open(endpoint.protocol(), ec);
  if (!ec) acceptor_.set_option(net::socket_base::reuse_address(true), ec);
  if (!ec) acceptor_.bind(endpoint, ec);
  if (!ec) acceptor_.listen(net::socket_base::max_listen_connections, ec);
}

void Listener::run() { do_accept(); }

void Listener::stop() {
  net::post(acceptor_.get_executor(), [self = shared_from_this()] {
    beast::error_code ignored;
    self->acceptor_.close(ignored);
  });
}

unsigned short Listener::port() const { return acceptor_.local_endpoint().port(); }

void Listener::do_accept() {
  acceptor_.async_accept(net::make_strand(ioc_), beast::bind_front_handler(&Listener::on_accept, shared_from_this()));
}

void Listener::on_accept(beast::error_code ec, tcp::socket socket) {
  if (ec == net::error::operation_aborted) return;
  if (!ec) {
    if (ctx_.counters.connections.load() >= ctx_.options.max_connections) {
      ctx_.counters.refused.fetch_add(1);
      refuse(std::move(socket));
    } else {
      std::make_shared<HttpSession>(std::move(socket), ctx_, take_slot(ctx_))->run();
    }
  } else if (!ctx_.stopping.load()) {
    // Out of descriptors (EMFILE/ENFILE) or memory: pause instead of spinning
    // on the error; connections wait in the listen backlog meanwhile.
    spdlog::warn("accept failed: {}; retrying in 50 ms", ec.message());
    retry_.expires_after(std::chrono::milliseconds(50));
    retry_.async_wait([self = shared_from_this()](beast::error_code e) {
      if (!e && !self->ctx_.stopping.load()) self->do_accept();
    });
    return;
  }
  if (!ctx_.stopping.load()) do_accept();
}

// Over the limit: a short 503 written without reading the request, then close.
void Listener::refuse(tcp::socket socket) {
  auto s = std::make_shared<tcp::socket>(std::move(socket));
  static const std::string kError = "{\"error\":\"too many connections; the server is at its limit\"}";
  auto body = std::make_shared<std::string>(
      "HTTP/1.1 503 Service Unavailable\r\nContent-Type: application/json\r\nConnection: close\r\n"
      "Retry-After: 1\r\nContent-Length: " +
      std::to_string(kError.size()) + "\r\n\r\n" + kError);
  net::async_write(*s, net::buffer(*body), [s, body](beast::error_code, std::size_t) {
    beast::error_code ignored;
    s->shutdown(tcp::socket::shutdown_both, ignored);
    s->close(ignored);
  });
}

}  // namespace droopline::server
