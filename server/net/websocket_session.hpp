#pragma once
// One streaming client: its own strand, one write in flight, a bounded queue in which old
// telemetry frames give way (counted and reported) but events and replies never do.
#include <chrono>
#include <deque>
#include <memory>
#include <string>

#include "server.hpp"

namespace droopline::server {

class WebsocketSession : public std::enable_shared_from_this<WebsocketSession> {
 public:
  /// `proof`: what the upgrade request's Authorization header proved (viewer when none).
  /// `history_s`: the greeting's history, its last that many seconds (negative: all it holds).
  WebsocketSession(tcp::socket&& socket, Context& ctx, Proof proof, std::shared_ptr<void> slot, double history_s);
  ~WebsocketSession();

  /// Accepts the upgrade request, then greets the client and joins the hub.
  void run(http::request<http::string_body> req);
  /// Queues a message for `self` (any thread); takes the hub's reference rather than making one.
  static void deliver(std::shared_ptr<WebsocketSession> self, const Outgoing& msg);
  /// Sends a close frame with `reason` (any thread).
  void close(websocket::close_code code, const std::string& reason);

 private:
  void on_accept(beast::error_code ec);
  void do_read();
  void on_read(beast::error_code ec, std::size_t bytes);
  void handle_message(const std::string& text);
  void reply(std::string text);
  void enqueue(const Outgoing& msg);
  void do_write();
  void on_write(beast::error_code ec, std::size_t bytes);
  void fail(beast::error_code ec, const char* what);

  // A socket bound to a concrete strand type: no type-erased executor to allocate on every write.
  using Strand = net::strand<net::io_context::executor_type>;
  using Socket = net::basic_stream_socket<tcp, Strand>;
  static Socket adopt(net::io_context& ioc, tcp::socket&& socket);
  websocket::stream<Socket> ws_;
  Context& ctx_;
  Role role_;                       // viewer, or what the upgrade or an auth message proved
  std::optional<SeatIdentity> seat_;  // role seat: which (counted in the roster's streams)
  void become(Proof proof);         // takes a new role, keeping the roster's stream counts right
  std::shared_ptr<void> slot_;  // holds this connection's place under the limit
  double history_s_;             // the greeting's history: its last that many seconds (< 0: all)
  beast::flat_buffer buffer_;
  std::deque<Outgoing> queue_;
  bool writing_ = false;
  bool closing_ = false;
  bool joined_ = false;
  std::uint64_t dropped_ = 0;      // not yet reported to the client
  std::uint64_t drop_streak_ = 0;  // frames dropped since the last one delivered
  std::string peer_;     // address:port, for the log
  std::string address_;  // the client's address: after a refused token or code it waits a second
                         // (ctx_.auth_backoff), however many sockets it opens
};

}  // namespace droopline::server
