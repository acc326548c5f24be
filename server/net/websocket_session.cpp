#include "websocket_session.hpp"

#include <nlohmann/json.hpp>
#include <spdlog/spdlog.h>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"
#include "typed_text.hpp"

namespace droopline::server {
namespace {
using json = nlohmann::ordered_json;
// A client that has lost this many frames in a row (10 s at 20 frames/s) is hopelessly behind.
constexpr std::uint64_t kMaxDropStreak = 200;
// Events and replies are never dropped; a client holding this many unsent has stopped reading.
constexpr std::size_t kMaxQueuedEvents = 4096;
// Messages quote what the client sent; invalid UTF-8 in it is replaced, never thrown on.
std::string safe_dump(const json& j) { return j.dump(-1, ' ', false, json::error_handler_t::replace); }
constexpr std::size_t kMaxIdChars = 64;  // longest string id echoed back
}  // namespace

WebsocketSession::Socket WebsocketSession::adopt(net::io_context& ioc, tcp::socket&& socket) {
  Socket out(net::make_strand(ioc));
  beast::error_code ec;
  const auto protocol = socket.local_endpoint(ec).protocol();
  out.assign(protocol, socket.release(ec), ec);
  return out;
}

WebsocketSession::WebsocketSession(tcp::socket&& socket, Context& ctx, Proof proof, std::shared_ptr<void> slot,
                                   double history_s)
    : ws_(adopt(*ctx.ioc, std::move(socket))),
      ctx_(ctx),
      role_(Role::viewer),
      slot_(std::move(slot)),
      history_s_(history_s) {
  become(std::move(proof));
  beast::error_code ec;
  const auto ep = beast::get_lowest_layer(ws_).remote_endpoint(ec);
  address_ = ec ? "?" : ep.address().to_string();
  peer_ = ec ? "?" : address_ + ":" + std::to_string(ep.port());
}

void WebsocketSession::become(Proof proof) {
  if (proof.refused_status) return;
  if (seat_) ctx_.seats.stream(seat_->id, -1);
  role_ = proof.role;
  seat_ = std::move(proof.seat);
  if (seat_) ctx_.seats.stream(seat_->id, +1);
}

WebsocketSession::~WebsocketSession() {
  if (seat_) ctx_.seats.stream(seat_->id, -1);
  ctx_.hub.leave(this);
  if (joined_) {
    ctx_.counters.clients.fetch_sub(1);
    spdlog::info("client {} disconnected", peer_);
  }
}

void WebsocketSession::fail(beast::error_code ec, const char* what) {
  if (ec == websocket::error::closed || ec == net::error::operation_aborted ||
      ec == beast::error::timeout || ec == net::error::eof || ec == net::error::connection_reset)
    return;
  spdlog::debug("client {}: {}: {}", peer_, what, ec.message());
}

void WebsocketSession::run(http::request<http::string_body> req) {
  beast::error_code ignored;
  beast::get_lowest_layer(ws_).set_option(net::socket_base::send_buffer_size(ctx_.options.stream_send_buffer), ignored);
  ws_.set_option(websocket::stream_base::timeout::suggested(beast::role_type::server));
  ws_.set_option(websocket::stream_base::decorator([](websocket::response_type& res) {
    res.set(http::field::server, "droopline");
  }));
  ws_.read_message_max(ctx_.options.max_message_bytes);
  ws_.text(true);
  ws_.auto_fragment(false);  // one frame per message: the shared buffer goes out without a copy
  ws_.async_accept(req, beast::bind_front_handler(&WebsocketSession::on_accept, shared_from_this()));
}

void WebsocketSession::on_accept(beast::error_code ec) {
  if (ec) return fail(ec, "accept");
  joined_ = true;
  ctx_.counters.clients.fetch_add(1);
  spdlog::info("client {} connected{}", peer_,
               role_ == Role::instructor ? " (instructor)" : seat_ ? " (seat " + seat_->id + ")" : std::string());
  // The greeting's contents are copied on the loop thread and the hub joined there too, which
  // keeps the order: nothing sent after the greeting's history can be missing from it or come
  // before it. Its JSON is written on this socket's strand, ahead of every frame posted later.
  auto self = shared_from_this();
  ctx_.live->hello([self](std::shared_ptr<const HelloSnapshot> snap) {
    net::post(self->ws_.get_executor(), [self, snap] {
      self->enqueue({std::make_shared<const std::string>(snap->to_json(self->history_s_)), false});
    });
    self->ctx_.hub.join(self);
  });
  do_read();
}

void WebsocketSession::do_read() {
  ws_.async_read(buffer_, beast::bind_front_handler(&WebsocketSession::on_read, shared_from_this()));
}

void WebsocketSession::on_read(beast::error_code ec, std::size_t) {
  if (ec) return fail(ec, "read");
  const std::string text = beast::buffers_to_string(buffer_.data());
  buffer_.consume(buffer_.size());
  if (ws_.got_binary()) {
    reply(safe_dump(json{{"type", "error"}, {"error", "messages are text frames holding JSON, not binary frames"}}));
    return do_read();
  }
  try {
    handle_message(text);
  } catch (const std::exception& e) {  // input never takes the server down
    spdlog::error("client {}: message failed: {}", peer_, e.what());
    reply(safe_dump(json{{"type", "error"}, {"error", "internal error handling the message"}}));
  }
  do_read();
}

void WebsocketSession::reply(std::string text) {
  deliver(shared_from_this(), {std::make_shared<const std::string>(std::move(text)), false});
}

void WebsocketSession::handle_message(const std::string& text) {
  std::string bad;
  const auto parsed = parse_untrusted_json(text, bad);
  if (!parsed) {
    reply(safe_dump(json{{"type", "error"}, {"error", bad}}));
    return;
  }
  const json& j = *parsed;
  if (!j.is_object() || !j.contains("type") || !j["type"].is_string()) {
    reply(safe_dump(json{{"type", "error"}, {"error", "messages are JSON objects with a \"type\""}}));
    return;
  }
  // The reply id is echoed back: a number, or a string of at most 64 characters.
  json id = nullptr;
  if (j.contains("id")) {
    const json& given = j["id"];
    if (!given.is_number() && !(given.is_string() && given.get_ref<const std::string&>().size() <= kMaxIdChars)) {
      reply(safe_dump(json{{"type", "error"},
                           {"error", "id: must be a number or a string of at most " + std::to_string(kMaxIdChars) +
                                         " characters"}}));
      return;
    }
    id = given;
  }
  const std::string type = j["type"].get<std::string>();
  // Each message takes its own fields and no others (a control message's are the route's, checked
  // there); a field the server would ignore is refused, as every HTTP body route does.
  std::vector<std::string> unknown;
  if (type == "auth") unknown_fields(j, {"type", "id", "token", "name"}, unknown);
  if (type == "commands") unknown_fields(j, {"type", "id", "commands"}, unknown);
  if (!unknown.empty()) {
    std::string all;
    for (const std::string& u : unknown) (all += all.empty() ? "" : "; ") += u;
    reply(safe_dump(json{{"type", "error"}, {"id", id}, {"error", all}}));
    return;
  }
  if (type == "auth") {
    const bool given = j.contains("token") && j["token"].is_string();
    const auto now = std::chrono::steady_clock::now();
    if (given && ctx_.auth_backoff.too_soon(address_, now))
      return reply(safe_dump(json{{"type", "auth"},
                                  {"id", id},
                                  {"ok", false},
                                  {"role", role_name(role_)},
                                  {"error", "too soon after a refused token or code: wait a second, then try again"}}));
    Proof proof = given ? prove(j["token"].get_ref<const std::string&>(), ctx_.token, ctx_.seats) : Proof{};
    if (given && proof.refused_status) {
      ctx_.auth_backoff.refused(address_, now);
      ctx_.counters.auth_refused.fetch_add(1);
      spdlog::info("client {}: a token or join code refused", peer_);
    }
    // A seat's trainee may give their name with the code: checked before the role changes, so a bad
    // name leaves the client as it was.
    std::string bad_name;
    std::optional<std::string> name;
    if (j.contains("name")) {
      if (!j["name"].is_string())
        bad_name = "name: must be a string";
      else if (!(name = typed_text(j["name"].get_ref<const std::string&>(), kTraineeName, bad_name)))
        ;  // bad_name says why
      else if (proof.role != Role::seat)
        bad_name = "name: only a seat's trainee gives a name (with the seat's join code)";
    }
    const bool ok = given && !proof.refused_status && bad_name.empty();
    if (ok) become(proof);
    json answer{{"type", "auth"}, {"id", id}, {"ok", ok}, {"role", role_name(role_)}};
    if (seat_) answer["seat"] = {{"id", seat_->id}, {"name", seat_->name}, {"areas", seat_->areas}};
    if (!ok) answer["error"] = !given ? "token: required, a string" : proof.refused_status ? proof.refused : bad_name;
    if (ok) spdlog::info("client {} authenticated as {}", peer_, seat_ ? "seat " + seat_->id : "instructor");
    if (!ok || !name) return reply(safe_dump(answer));
    // The name goes the way POST /api/v1/seats/join goes; the auth answer waits for it.
    Request join;
    join.verb = Verb::post;
    join.target = "/api/v1/seats/join";
    join.role = role_;
    join.seat = seat_;
    join.body = json{{"name", *name}}.dump();
    ctx_.api->handle(join, [self = shared_from_this(), answer, trainee = *name](Reply r) mutable {
      if (r.status == 200) {
        answer["trainee"] = trainee;
      } else {
        std::string why;
        const auto e = parse_untrusted_json(r.body, why);
        answer["name_error"] = e && e->is_object() && e->contains("error") && (*e)["error"].is_string()
                                   ? (*e)["error"]
                                   : json("name refused (" + std::to_string(r.status) + ")");
      }
      self->reply(safe_dump(answer));
    });
    return;
  }
  // A control message is a request to the API's route table: the same route, role rule and
  // messages as over HTTP; the reply carries the route's status and JSON body.
  Request call;
  call.verb = Verb::post;
  call.role = role_;
  call.seat = seat_;
  call.token_hint = "send {\"type\":\"auth\",\"token\":...} first";
  auto self = shared_from_this();
  auto respond = [self, head = "{\"type\":\"reply\",\"id\":" + safe_dump(id) + ",\"status\":"](Reply r) {
    // The body is the route's own JSON text, spliced in as it is.
    const std::string body = r.type == "application/json" ? r.body : safe_dump(json(r.body));
    self->reply(head + std::to_string(r.status) + ",\"body\":" + body + "}");
  };
  if (type == "commands") {
    call.target = "/api/v1/commands";
    if (!j.contains("commands")) {
      respond(Reply{400, "application/json", error_json("commands: required, one command object or a list of them"), {}, {}});
      return;
    }
    call.body = j["commands"].dump();
  } else if (type == "control") {
    call.target = "/api/v1/control";
    // {"type": "control", "id": ..., "action": ..., "speed": ..., "to_s": ...}: the route gets the
    // body HTTP would carry (the message's own fields go), and refuses any other field as it would.
    json body = j;
    body.erase("type");
    body.erase("id");
    call.body = safe_dump(body);
  } else {
    reply(safe_dump(json{{"type", "error"}, {"id", id}, {"error", "unknown message type \"" + clip_text(type, 64) + "\" (expected auth, commands, control)"}}));
    return;
  }
  ctx_.api->handle(call, std::move(respond));
}

void WebsocketSession::deliver(std::shared_ptr<WebsocketSession> self, const Outgoing& msg) {
  auto executor = self->ws_.get_executor();
  net::post(executor, [self = std::move(self), msg] { self->enqueue(msg); });
}

void WebsocketSession::enqueue(const Outgoing& msg) {
  if (closing_) return;
  if (msg.droppable && queue_.size() >= ctx_.options.client_queue) {
    // Drop the oldest telemetry frame that is not being written; the new one replaces it.
    auto victim = std::find_if(queue_.begin() + (writing_ ? 1 : 0), queue_.end(),
                               [](const Outgoing& o) { return o.droppable; });
    if (victim != queue_.end()) {
      queue_.erase(victim);
    }
    ++dropped_;
    ctx_.counters.frames_dropped.fetch_add(1);
    if (++drop_streak_ > kMaxDropStreak) {
      ctx_.counters.slow_closed.fetch_add(1);
      close(websocket::close_code::policy_error, "client too slow: frames dropped for 10 s");
      return;
    }
    if (victim == queue_.end()) return;  // nothing could give way: the new frame is the one lost
  }
  if (!msg.droppable && queue_.size() > kMaxQueuedEvents) {
    ctx_.counters.slow_closed.fetch_add(1);
    close(websocket::close_code::policy_error, "client stopped reading");
    return;
  }
  queue_.push_back(msg);
  if (!writing_) do_write();
}

void WebsocketSession::do_write() {
  if (queue_.empty() || closing_) {
    writing_ = false;
    return;
  }
  writing_ = true;
  if (queue_.front().droppable && dropped_ > 0) {
    // Tell the client what it missed before the next frame.
    queue_.push_front({std::make_shared<const std::string>(
                           json{{"type", "dropped"}, {"frames", dropped_}}.dump()),
                       false});
    dropped_ = 0;
  }
  ws_.async_write(net::buffer(*queue_.front().text),
                  beast::bind_front_handler(&WebsocketSession::on_write, shared_from_this()));
}

void WebsocketSession::on_write(beast::error_code ec, std::size_t) {
  if (ec) {
    writing_ = false;
    return fail(ec, "write");
  }
  if (queue_.front().droppable) {
    ctx_.counters.frames_sent.fetch_add(1);
    drop_streak_ = 0;
  }
  queue_.pop_front();
  do_write();
}

void WebsocketSession::close(websocket::close_code code, const std::string& reason) {
  net::post(ws_.get_executor(), [self = shared_from_this(), code, reason] {
    if (self->closing_) return;
    self->closing_ = true;
    spdlog::info("closing client {}: {}", self->peer_, reason);
    if (self->writing_) {
      // A write is stuck behind a client that does not read: the close frame could never go
      // out, so the connection is cut instead.
      beast::error_code ignored;
      beast::get_lowest_layer(self->ws_).shutdown(tcp::socket::shutdown_both, ignored);
      beast::get_lowest_layer(self->ws_).close(ignored);
      return;
    }
    self->ws_.async_close(websocket::close_reason(code, reason), [self](beast::error_code) {});
  });
}

}  // namespace droopline::server
