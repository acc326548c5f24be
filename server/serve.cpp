#include <sys/resource.h>

#include <csignal>
#include <cstdlib>
#include <fstream>
#include <random>
#include <sstream>

#include <spdlog/spdlog.h>

#include "droopline/scenario_io.hpp"
#include "http_session.hpp"
#include "server.hpp"
#include "websocket_session.hpp"

namespace droopline::server {

bool token_matches(const std::string& given, const std::string& token) {
  if (given.size() != token.size() || token.empty()) return false;
  unsigned char diff = 0;
  for (std::size_t i = 0; i < token.size(); ++i)
    diff |= static_cast<unsigned char>(given[i] ^ token[i]);
  return diff == 0;
}

void Hub::join(const std::shared_ptr<WebsocketSession>& s) {
  std::lock_guard lock(mutex_);
  sessions_.push_back(s);
}

void Hub::leave(const WebsocketSession* s) {
  std::lock_guard lock(mutex_);
  std::erase_if(sessions_, [s](const std::weak_ptr<WebsocketSession>& w) {
    auto p = w.lock();
    return !p || p.get() == s;
  });
}

void Hub::broadcast(const Outgoing& msg) {
  std::vector<std::weak_ptr<WebsocketSession>> copy;
  {
    std::lock_guard lock(mutex_);
    copy = sessions_;
  }
  for (auto& w : copy)
    if (auto s = w.lock()) s->deliver(msg);
}

void Hub::close_all(const std::string& reason) {
  std::vector<std::weak_ptr<WebsocketSession>> copy;
  {
    std::lock_guard lock(mutex_);
    copy = sessions_;
  }
  for (auto& w : copy)
    if (auto s = w.lock()) s->close(websocket::close_code::going_away, reason);
}

std::size_t Hub::size() const {
  std::lock_guard lock(mutex_);
  return sessions_.size();
}

namespace {

// Holds one place under the connection limit for as long as a session keeps it.
std::shared_ptr<void> take_slot(Context& ctx) {
  ctx.counters.connections.fetch_add(1);
  return std::shared_ptr<void>(nullptr, [&ctx](void*) { ctx.counters.connections.fetch_sub(1); });
}

class Listener : public std::enable_shared_from_this<Listener> {
 public:
  Listener(net::io_context& ioc, tcp::endpoint endpoint, Context& ctx, beast::error_code& ec)
      : ioc_(ioc), acceptor_(net::make_strand(ioc)), retry_(acceptor_.get_executor()), ctx_(ctx) {
    acceptor_.open(endpoint.protocol(), ec);
    if (!ec) acceptor_.set_option(net::socket_base::reuse_address(true), ec);
    if (!ec) acceptor_.bind(endpoint, ec);
    if (!ec) acceptor_.listen(net::socket_base::max_listen_connections, ec);
  }
  void run() { do_accept(); }
  void stop() {
    net::post(acceptor_.get_executor(), [self = shared_from_this()] {
      beast::error_code ignored;
      self->acceptor_.close(ignored);
    });
  }
  unsigned short port() const { return acceptor_.local_endpoint().port(); }

 private:
  void do_accept() {
    acceptor_.async_accept(net::make_strand(ioc_), beast::bind_front_handler(&Listener::on_accept, shared_from_this()));
  }
  void on_accept(beast::error_code ec, tcp::socket socket) {
    if (ec == net::error::operation_aborted) return;
    if (!ec) {
      if (ctx_.counters.connections.load() >= ctx_.options.max_connections) {
        ctx_.counters.refused.fetch_add(1);
        refuse(std::move(socket));
      } else {
        std::make_shared<HttpSession>(std::move(socket), ctx_, take_slot(ctx_))->run();
      }
    } else if (!ctx_.stopping.load()) {
      // Out of descriptors (EMFILE/ENFILE) or memory: pause instead of spinning on the error;
      // connections wait in the listen backlog meanwhile.
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
  void refuse(tcp::socket socket) {
    auto s = std::make_shared<tcp::socket>(std::move(socket));
    auto body = std::make_shared<std::string>(
        "HTTP/1.1 503 Service Unavailable\r\nContent-Type: application/json\r\nConnection: close\r\n"
        "Retry-After: 1\r\nContent-Length: 63\r\n\r\n"
        "{\"error\":\"too many connections; the server is at its limit\"}\n  ");
    body->resize(body->size() - 2);
    net::async_write(*s, net::buffer(*body), [s, body](beast::error_code, std::size_t) {
      beast::error_code ignored;
      s->shutdown(tcp::socket::shutdown_both, ignored);
      s->close(ignored);
    });
  }

  net::io_context& ioc_;
  tcp::acceptor acceptor_;
  net::steady_timer retry_;
  Context& ctx_;
};

// Every connection is a descriptor, and a refused one is one too until its 503 is written: ask
// for the hard limit (common practice for servers) and warn when even that is below the
// connection limit plus room for files.
void raise_descriptor_limit(std::size_t max_connections) {
  rlimit lim{};
  if (::getrlimit(RLIMIT_NOFILE, &lim) != 0) return;
  if (lim.rlim_cur < lim.rlim_max) {
    lim.rlim_cur = lim.rlim_max;
    ::setrlimit(RLIMIT_NOFILE, &lim);
    ::getrlimit(RLIMIT_NOFILE, &lim);
  }
  if (lim.rlim_cur != RLIM_INFINITY && lim.rlim_cur < max_connections + 64)
    spdlog::warn("only {} file descriptors allowed (ulimit -n) for --max-connections {}; accepts will pause when they run out",
                 static_cast<unsigned long long>(lim.rlim_cur), max_connections);
}

std::string make_token() {
  std::random_device rd;
  std::string t;
  const char* hex = "0123456789abcdef";
  for (int i = 0; i < 32; ++i) t += hex[rd() % 16];
  return t;
}

}  // namespace

int serve(Options options) {
  Context ctx;
  ctx.options = std::move(options);
  const Options& opt = ctx.options;
  ctx.files = std::make_unique<StaticFiles>(opt.web_root);

  LoadResult r = load_scenario_file(opt.scenario_file);
  for (const Issue& i : r.issues)
    (i.warning ? spdlog::warn("{}: {}", opt.scenario_file, i.text()) : spdlog::error("{}: {}", opt.scenario_file, i.text()));
  if (!r.def) return 2;

  if (!opt.token_file.empty()) {
    std::ifstream in(opt.token_file);
    std::getline(in, ctx.token);
    while (!ctx.token.empty() && std::isspace(static_cast<unsigned char>(ctx.token.back()))) ctx.token.pop_back();
    if (!in && ctx.token.empty()) {
      spdlog::error("cannot read the token file \"{}\"", opt.token_file);
      return 2;
    }
    if (ctx.token.size() < 8) {
      spdlog::error("the token in \"{}\" is shorter than 8 characters", opt.token_file);
      return 2;
    }
  } else if (const char* env = std::getenv("DROOPLINE_TOKEN"); env && *env) {
    ctx.token = env;
  } else {
    ctx.token = make_token();
    std::printf("instructor token (printed once): %s\n", ctx.token.c_str());
    std::fflush(stdout);
  }

  raise_descriptor_limit(opt.max_connections);
  net::io_context ioc{static_cast<int>(std::max(1u, opt.io_threads))};
  ctx.ioc = &ioc;
  beast::error_code ec;
  const auto address = net::ip::make_address(opt.host, ec);
  if (ec) {
    spdlog::error("--listen: \"{}\" is not an IP address", opt.host);
    return 2;
  }
  LiveConfig lc;
  lc.speed = opt.speed;
  lc.frame_hz = opt.frame_hz;
  lc.history_s = opt.history_s;
  lc.journal_path = opt.journal;
  ctx.live = std::make_unique<LiveSession>(*r.def, lc, [&ctx](const Outgoing& m) { ctx.hub.broadcast(m); });
  if (!ctx.live->journal_ok()) {
    spdlog::error("{}", ctx.live->journal_error());
    return 1;
  }
  ctx.replay_pool = std::make_unique<net::thread_pool>(std::max<std::size_t>(1, opt.replay_workers));

  auto listener = std::make_shared<Listener>(ioc, tcp::endpoint{address, opt.port}, ctx, ec);
  if (ec) {
    spdlog::error("cannot listen on {}:{}: {}", opt.host, opt.port, ec.message());
    return 1;
  }
  listener->run();
  spdlog::info("droopline serving \"{}\" on http://{}:{}/ (stream ws://{}:{}/api/v1/stream)", r.def->name, opt.host,
               listener->port(), opt.host, listener->port());
  if (!address.is_loopback())
    spdlog::warn("the session is reachable from the network at {}:{}: viewing needs no token, changes need the instructor token",
                 opt.host, listener->port());
  std::printf("listening on %s:%u\n", opt.host.c_str(), static_cast<unsigned>(listener->port()));
  std::fflush(stdout);

  net::signal_set signals(ioc, SIGINT, SIGTERM);
  signals.async_wait([&](beast::error_code, int sig) {
    spdlog::info("signal {}: shutting down", sig);
    ctx.stopping = true;
    listener->stop();
    ctx.hub.close_all("server shutting down");
    ctx.live->stop();  // journal stop record written, loop joined
    // Give close frames a moment to go out, then stop.
    auto timer = std::make_shared<net::steady_timer>(ioc, std::chrono::milliseconds(300));
    timer->async_wait([&ioc, timer](beast::error_code) { ioc.stop(); });
  });

  std::vector<std::thread> threads;
  for (unsigned i = 1; i < std::max(1u, opt.io_threads); ++i) threads.emplace_back([&ioc] { ioc.run(); });
  ioc.run();
  for (auto& t : threads) t.join();
  ctx.live->stop();
  ctx.replay_pool->join();
  spdlog::info("stopped");
  return 0;
}

}  // namespace droopline::server
