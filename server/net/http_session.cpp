#include "http_session.hpp"

#include <algorithm>
#include <limits>
#include <type_traits>

#include <spdlog/spdlog.h>

#include "websocket_session.hpp"

namespace droopline::server {
namespace {

constexpr auto kHeaderTimeout = std::chrono::seconds(10);  // slow-loris guard per request
constexpr std::size_t kHeaderLimit = 16 * 1024;
// Lingering close after an early error reply: what is still read and thrown away, at most (8 MiB,
// or the largest body limit and 1 MiB more, so a client refused just past it still gets the 413).
constexpr auto kLingerTime = std::chrono::seconds(5);
constexpr std::size_t kLingerBytes = 8u << 20;

Verb verb_of(http::verb v) {
  switch (v) {
    case http::verb::get: return Verb::get;
    case http::verb::head: return Verb::head;
    case http::verb::post: return Verb::post;
    case http::verb::put: return Verb::put;
    case http::verb::delete_: return Verb::delete_;
    default: return Verb::other;
  }
}

}  // namespace

http::response<http::string_body> json_response(unsigned version, bool keep_alive, int status,
                                                std::string body) {
  http::response<http::string_body> res{static_cast<http::status>(status), version};
  res.set(http::field::server, "droopline");
  res.set(http::field::content_type, "application/json");
  res.set(http::field::cache_control, "no-store");
  res.keep_alive(keep_alive);
  res.body() = std::move(body);
  res.prepare_payload();
  return res;
}

HttpSession::HttpSession(tcp::socket&& socket, Context& ctx, std::shared_ptr<void> slot)
    : stream_(std::move(socket)), ctx_(ctx), slot_(std::move(slot)) {}

void HttpSession::run() {
  net::dispatch(stream_.get_executor(), beast::bind_front_handler(&HttpSession::do_read, shared_from_this()));
}

void HttpSession::do_read() {
  parser_.emplace();
  // The header is read first with no body limit (Beast would check a Content-Length against it when
  // the header ends); on_header then checks and sets the limit of the route asked for.
  body_limit_ = ctx_.options.max_body_bytes;
  parser_->body_limit(std::numeric_limits<std::uint64_t>::max());
  parser_->header_limit(kHeaderLimit);
  stream_.expires_after(kHeaderTimeout);
  http::async_read_header(stream_, buffer_, *parser_,
                          beast::bind_front_handler(&HttpSession::on_header, shared_from_this()));
}

void HttpSession::on_header(beast::error_code ec, std::size_t) {
  if (ec) return refuse_read(ec);
  // Only a fit carries a recording in its body, and only the instructor may post one: every other
  // request keeps the small limit, so a stranger cannot make the server read 16 MiB for a 401.
  // (The route's role is still checked by Api::handle; this only decides how much is read.)
  const auto& head = parser_->get();
  bool fit = head.method() == http::verb::post && parse_target(head.target()).path == "/api/v1/fits";
  if (fit) {
    Request probe;
    probe.authorization = std::string(head[http::field::authorization]);
    fit = role_of(probe, ctx_.token, ctx_.seats).role == Role::instructor;
  }
  body_limit_ = fit ? ctx_.options.max_fit_body_bytes : ctx_.options.max_body_bytes;
  if (const auto length = parser_->content_length(); length && *length > body_limit_)
    return refuse_read(http::error::body_limit);  // decided from the header: nothing more is read
  parser_->body_limit(body_limit_);
  // A client that asked to be told before sending its body (curl 7.88 does for bodies over 1 MiB) is
  // told now that the header passed; otherwise it would wait a second or so and then send anyway.
  if (head.version() == 11 && beast::iequals(head[http::field::expect], "100-continue") && !parser_->is_done()) {
    static constexpr std::string_view kContinue = "HTTP/1.1 100 Continue\r\n\r\n";
    net::async_write(stream_, net::buffer(kContinue.data(), kContinue.size()),
                     [self = shared_from_this()](beast::error_code write_ec, std::size_t) {
                       if (write_ec) return self->refuse_read(write_ec);
                       self->read_body();
                     });
    return;
  }
  read_body();
}

void HttpSession::read_body() {
  http::async_read(stream_, buffer_, *parser_, beast::bind_front_handler(&HttpSession::on_read, shared_from_this()));
}

void HttpSession::refuse_read(beast::error_code ec) {
  head_ = false;
  if (ec == http::error::end_of_stream || ec == beast::error::timeout || ec == net::error::operation_aborted ||
      ec == net::error::connection_reset) {
    beast::error_code ignored;
    stream_.socket().shutdown(tcp::socket::shutdown_send, ignored);
    return;
  }
  if (ec == http::error::body_limit) {
    // Refused from the header, whose method is known: a HEAD is answered with the headers only.
    head_ = parser_->get().method() == http::verb::head;
    return send_then_linger(
        json_response(11, false, 413, error_json("request body larger than " + std::to_string(body_limit_) + " bytes")));
  }
  if (ec == http::error::header_limit) {
    return send_then_linger(json_response(11, false, 431, error_json("request headers larger than 16 KiB")));
  }
  send_then_linger(json_response(11, false, 400, error_json("malformed HTTP request: " + ec.message())));
}

void HttpSession::on_read(beast::error_code ec, std::size_t) {
  head_ = false;
  if (ec) return refuse_read(ec);
  HttpRequest req = parser_->release();
  head_ = req.method() == http::verb::head;
  ctx_.counters.requests.fetch_add(1);
  spdlog::debug("{} {}", std::string(req.method_string()), std::string(req.target()));
  if (websocket::is_upgrade(req)) return upgrade(std::move(req));
  const unsigned version = req.version();
  try {
    handle(std::move(req));
  } catch (const std::exception& e) {  // input never takes the server down
    spdlog::error("request failed: {}", e.what());
    send(json_response(version, false, 500, error_json("internal error handling the request")));
  }
}

template <class Body>
void HttpSession::send(http::response<Body> res) {
  const bool keep_alive = res.keep_alive();
  if constexpr (std::is_same_v<Body, http::string_body>)
    if (head_) res.body().clear();  // a HEAD answer has the headers only (Content-Length kept)
  auto msg = std::make_shared<http::response<Body>>(std::move(res));
  writing_ = msg;
  stream_.expires_after(std::chrono::seconds(30));
  http::async_write(stream_, *msg, beast::bind_front_handler(&HttpSession::on_write, shared_from_this(), keep_alive));
}

void HttpSession::on_write(bool keep_alive, beast::error_code ec, std::size_t) {
  writing_.reset();
  if (ec) return;
  if (!keep_alive || ctx_.stopping.load()) {
    beast::error_code ignored;
    stream_.socket().shutdown(tcp::socket::shutdown_send, ignored);
    if (linger_) do_discard();
    return;
  }
  do_read();
}

void HttpSession::send_then_linger(Response res) {
  linger_ = true;
  send(std::move(res));
}

void HttpSession::do_discard() {
  stream_.expires_after(kLingerTime);  // the whole linger, not per read
  stream_.async_read_some(net::buffer(discard_buffer_),
                          beast::bind_front_handler(&HttpSession::on_discard, shared_from_this()));
}

void HttpSession::on_discard(beast::error_code ec, std::size_t bytes) {
  discarded_ += bytes;
  const std::size_t most = std::max(kLingerBytes, ctx_.options.max_fit_body_bytes + (1u << 20));
  if (ec || discarded_ >= most) return;  // end of stream, reset, timeout or enough: close
  stream_.async_read_some(net::buffer(discard_buffer_),
                          beast::bind_front_handler(&HttpSession::on_discard, shared_from_this()));
}

void HttpSession::answer(unsigned version, bool keep_alive, Reply reply) {
  if (!reply.file.empty()) return serve_file(version, keep_alive, reply.file);
  Response res{static_cast<http::status>(reply.status), version};
  res.set(http::field::server, "droopline");
  res.set(http::field::content_type, reply.type);
  res.set(http::field::cache_control, "no-store");
  for (const auto& [name, value] : reply.headers) res.set(name, value);
  res.keep_alive(keep_alive);
  res.body() = std::move(reply.body);
  res.prepare_payload();
  send(std::move(res));
}

void HttpSession::upgrade(HttpRequest&& req) {
  const Target t = parse_target(req.target());
  auto refuse = [self = shared_from_this(), version = req.version()](int status, const std::string& why) {
    self->send(json_response(version, false, status, error_json(why)));
  };
  if (t.path != "/api/v1/stream") return refuse(404, "WebSocket is served at /api/v1/stream only");
  // ?history_s=N: the greeting carries only the history's last N seconds (0: none; default all).
  if (std::string unread = unread_query(t, kStreamQuery, "GET /api/v1/stream"); !unread.empty())
    return refuse(400, unread);
  double history_s = -1.0;
  std::string bad;
  if (!query_number(t, "history_s", -1.0, history_s, bad)) return refuse(400, bad);
  if (t.has("history_s") && history_s < 0.0) return refuse(400, "query parameter history_s: must be >= 0");
  // Browsers send Origin; it must be this server (or an allowed origin). Scripts may omit it.
  if (req.count(http::field::origin)) {
    const std::string origin(req[http::field::origin]);
    const std::string host(req[http::field::host]);
    bool allowed = origin == "http://" + host || origin == "https://" + host;
    for (const auto& a : ctx_.options.allow_origins) allowed = allowed || origin == a;
    if (!allowed) return refuse(403, "WebSocket origin \"" + origin + "\" is not allowed (use --allow-origin)");
  }
  Proof proof;
  if (req.count(http::field::authorization)) {
    Request probe;
    probe.authorization = std::string(req[http::field::authorization]);
    proof = role_of(probe, ctx_.token, ctx_.seats);
    if (proof.refused_status)
      return after_refusal([refuse, proof] { refuse(proof.refused_status, proof.refused); });
  }
  stream_.expires_never();
  std::make_shared<WebsocketSession>(stream_.release_socket(), ctx_, std::move(proof), slot_, history_s)
      ->run(std::move(req));
}

void HttpSession::handle(HttpRequest&& req) {
  const unsigned version = req.version();
  const bool keep = req.keep_alive();
  Request call;
  call.verb = verb_of(req.method());
  call.target = std::string(req.target());
  if (req.count(http::field::authorization)) call.authorization = std::string(req[http::field::authorization]);
  call.body = std::move(req.body());
  // A method this server has no use for anywhere is not implemented (RFC 9110, 9.1: 501); 405 is
  // for a known method on a resource that does not take it.
  if (call.verb == Verb::other) {
    Response res = json_response(version, keep, 501,
                                 error_json("method " + quote_cut(std::string(req.method_string())) +
                                            " is not implemented; this server takes GET, HEAD, POST, PUT and DELETE"));
    return send(std::move(res));
  }
  // A refused token or join code is answered after a second: guessing a code over one connection
  // then takes months, not hours (the limit per address bounds the connections).
  if (call.authorization && role_of(call, ctx_.token, ctx_.seats).refused_status)
    return after_refusal([self = shared_from_this(), call = std::move(call), version, keep]() mutable {
      self->dispatch(std::move(call), version, keep);
    });
  dispatch(std::move(call), version, keep);
}

void HttpSession::after_refusal(std::function<void()> then) {
  ctx_.counters.auth_refused.fetch_add(1);
  beast::error_code peer_ec;
  const auto peer = stream_.socket().remote_endpoint(peer_ec);
  spdlog::info("client {}: a token or join code refused", peer_ec ? std::string("?") : peer.address().to_string());
  // The connection keeps its place under the limits meanwhile, so closing it does not help.
  auto timer = std::make_shared<net::steady_timer>(stream_.get_executor(), AuthBackoff::kWait);
  timer->async_wait([timer, then = std::move(then)](beast::error_code) { then(); });
}

void HttpSession::dispatch(Request call, unsigned version, bool keep) {
  // The reply may come from any thread: it is carried back to this connection's strand.
  auto respond = [self = shared_from_this(), version, keep](Reply reply) {
    net::post(self->stream_.get_executor(), [self, version, keep, reply = std::move(reply)]() mutable {
      self->answer(version, keep, std::move(reply));
    });
  };
  if (ctx_.api->handle(call, std::move(respond))) return;
  // Everything else is one of the page's files, or nothing.
  if (call.verb != Verb::get && call.verb != Verb::head) {
    Response res = json_response(version, keep, 405, error_json("method not allowed; use GET, HEAD"));
    res.set(http::field::allow, "GET, HEAD");
    return send(std::move(res));
  }
  serve_file(version, keep, parse_target(call.target).path);
}

void HttpSession::serve_file(unsigned version, bool keep, const std::string& path) {
  const StaticFiles::Lookup found = ctx_.files->resolve(path);
  if (found.status != 200)
    return send(json_response(version, keep, found.status, error_json("not served: " + quote_cut(path) + " (" + found.error + ")")));
  beast::error_code ec;
  http::file_body::value_type body;
  body.open(found.file.c_str(), beast::file_mode::scan, ec);
  if (ec) return send(json_response(version, keep, 404, error_json("not served: " + quote_cut(path) + " (cannot be opened)")));
  auto headers = [&](auto& res) {
    res.set(http::field::server, "droopline");
    res.set(http::field::content_type, content_type_of(found.file));
    res.set(http::field::cache_control, found.file.extension() == ".html" ? "no-cache" : "public, max-age=300");
    res.set("X-Content-Type-Options", "nosniff");
    res.keep_alive(keep);
  };
  if (head_) {
    http::response<http::empty_body> res{http::status::ok, version};
    headers(res);
    res.content_length(body.size());
    return send(std::move(res));
  }
  http::response<http::file_body> res{std::piecewise_construct, std::make_tuple(std::move(body)),
                                      std::make_tuple(http::status::ok, version)};
  headers(res);
  res.prepare_payload();
  send(std::move(res));
}

}  // namespace droopline::server
