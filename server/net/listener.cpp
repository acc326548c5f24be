#include "listener.hpp"

#include <spdlog/spdlog.h>

#include "http_session.hpp"

namespace droopline::server {
namespace {

// Holds one place under the connection limit, and under its address's, for as long as a session
// keeps it. `address` is empty for an address the per-address limit does not count.
std::shared_ptr<void> take_slot(Context& ctx, std::string address) {
  ctx.counters.connections.fetch_add(1);
  return std::shared_ptr<void>(nullptr, [&ctx, address = std::move(address)](void*) {
    ctx.counters.connections.fetch_sub(1);
    if (!address.empty()) ctx.per_address.release(address);
  });
}

// This machine's own addresses: the operator, or a TLS proxy in front that carries every client.
bool exempt(const net::ip::address& a) {
  if (a.is_v6() && a.to_v6().is_v4_mapped()) return exempt(net::ip::make_address_v4(net::ip::v4_mapped, a.to_v6()));
  return a == net::ip::address_v4::loopback() || a == net::ip::address_v6::loopback();
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
    beast::error_code peer_ec;
    const tcp::endpoint peer = socket.remote_endpoint(peer_ec);
    const std::string address = peer_ec || exempt(peer.address()) ? std::string() : peer.address().to_string();
    if (ctx_.counters.connections.load() >= ctx_.options.max_connections) {
      ctx_.counters.refused.fetch_add(1);
      refuse(std::move(socket), "too many connections; the server is at its limit");
    } else if (!address.empty() && !ctx_.per_address.take(address, ctx_.options.max_connections_per_address)) {
      ctx_.counters.refused.fetch_add(1);
      refuse(std::move(socket), "too many connections from this address");
    } else {
      std::make_shared<HttpSession>(std::move(socket), ctx_, take_slot(ctx_, address))->run();
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
bool AuthBackoff::too_soon(const std::string& address, Clock::time_point now) {
  std::lock_guard lock(mutex_);
  auto it = next_.find(address);
  return it != next_.end() && now < it->second;
}

void AuthBackoff::refused(const std::string& address, Clock::time_point now) {
  std::lock_guard lock(mutex_);
  if (next_.size() > 4096) std::erase_if(next_, [&](const auto& e) { return e.second <= now; });  // bounded
  next_[address] = now + kWait;
}

bool PerAddress::take(const std::string& address, std::size_t most) {
  std::lock_guard lock(mutex_);
  std::size_t& n = open_[address];  // most >= 1: a new entry is always taken
  if (n >= most) return false;
  ++n;
  return true;
}

void PerAddress::release(const std::string& address) {
  std::lock_guard lock(mutex_);
  auto it = open_.find(address);
  if (it != open_.end() && --it->second == 0) open_.erase(it);
}

void Listener::refuse(tcp::socket socket, const std::string& why) {
  auto s = std::make_shared<tcp::socket>(std::move(socket));
  const std::string error = "{\"error\":\"" + why + "\"}";
  auto body = std::make_shared<std::string>(
      "HTTP/1.1 503 Service Unavailable\r\nContent-Type: application/json\r\nConnection: close\r\n"
      "Retry-After: 1\r\nContent-Length: " +
      std::to_string(error.size()) + "\r\n\r\n" + error);
  net::async_write(*s, net::buffer(*body), [s, body](beast::error_code, std::size_t) {
    beast::error_code ignored;
    s->shutdown(tcp::socket::shutdown_both, ignored);
    s->close(ignored);
  });
}

}  // namespace droopline::server
