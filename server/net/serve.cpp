#include <sys/resource.h>

#include <csignal>
#include <filesystem>
#include <cstdlib>
#include <random>

#include <spdlog/spdlog.h>

#include "droopline/scenario_io.hpp"
#include "droopline/exercise.hpp"
#include "http_session.hpp"
#include "journal.hpp"
#include "listener.hpp"
#include "server.hpp"
#include "websocket_session.hpp"

namespace droopline::server {

namespace {

// Network and worker threads' niceness above the loop's when the loop has no real-time priority:
// a scheduler weight about a third of the loop's.
constexpr int kNetworkNiceness = 5;

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

// The training records: --records FILE, none with `--records none`, else beside the journal
// (droopline-data/records.sqlite3, the folder made), else none. A file that cannot be used is
// said once by the store; the session runs without records then.
std::shared_ptr<records::RecordsStore> open_records(const Options& opt) {
  if (opt.records == "none") {
    spdlog::info("records: --records none: no training records are kept");
    return nullptr;
  }
  std::string path = opt.records;
  if (path.empty()) {
    if (opt.journal.empty()) {
      spdlog::info("records: no --records and no --journal: no training records are kept");
      return nullptr;
    }
    std::error_code ec;
    const auto dir = std::filesystem::absolute(opt.journal, ec).parent_path() / "droopline-data";
    // Only the data folder is made: the journal's own folder must exist (the journal says so if not).
    std::filesystem::create_directory(dir, ec);
    if (ec) spdlog::warn("records: cannot make the folder {}: {}", dir.string(), ec.message());
    path = (dir / "records.sqlite3").string();
  }
  auto store = std::make_shared<records::RecordsStore>(path);
  if (store->ok()) spdlog::info("records: {}", path);
  return store;
}

}  // namespace

int serve(Options options) {
  Context ctx;
  ctx.options = std::move(options);
  const Options& opt = ctx.options;
  ctx.files = std::make_unique<StaticFiles>(opt.web_root);

  const std::string& file = opt.exercise_file.empty() ? opt.scenario_file : opt.exercise_file;
  std::optional<study::Exercise> exercise;
  LoadResult r;
  if (!opt.exercise_file.empty()) {
    study::ExerciseLoad x = study::load_exercise_file(opt.exercise_file);
    r.issues = std::move(x.issues);
    if (x.exercise) r.system = x.exercise->system;
    exercise = std::move(x.exercise);
  } else {
    r = load_scenario_file(opt.scenario_file);
  }
  for (const Issue& i : r.issues)
    (i.warning ? spdlog::warn("{}: {}", file, i.text()) : spdlog::error("{}: {}", file, i.text()));
  if (!r.system) return 2;

  bool made_token = false;  // printed once the session is sure to start (below)
  if (!opt.token_file.empty()) {
    std::vector<Issue> unread;  // a regular file only: a device or a pipe would never end
    const std::optional<std::string> text = read_text_file(opt.token_file, unread);
    if (text) ctx.token = text->substr(0, text->find('\n'));
    while (!ctx.token.empty() && std::isspace(static_cast<unsigned char>(ctx.token.back()))) ctx.token.pop_back();
    if (!text) {
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
    made_token = true;
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
  // The journal once the arguments are known good (opening it creates the file): a session that
  // cannot keep one does not start, with one message, before a token is printed, records are
  // opened beside it or the loop starts.
  if (const Journal journal(opt.journal); !journal.ok()) {
    spdlog::error("{}", journal.error());
    return 1;
  } else if (!journal.repaired().empty()) {
    spdlog::warn("{}", journal.repaired());  // opening it cut off a torn last record
  }
  if (made_token) {
    std::printf("instructor token (printed once): %s\n", ctx.token.c_str());
    std::fflush(stdout);
  }
  LiveConfig lc;
  lc.speed = opt.speed;
  lc.frame_hz = opt.frame_hz;
  lc.wake_per_frame = !opt.wake_every_step;
  lc.history_s = opt.history_s;
  lc.journal_path = opt.journal;
  ctx.records = open_records(opt);
  lc.run_log = ctx.records;
  if (exercise) {
    ctx.seats.set(exercise->def.seats);
    for (const SeatStatus& seat : ctx.seats.list())
      std::printf("seat %s (%s): join code %s\n", seat.id.c_str(), seat.name.c_str(), seat.join_code.c_str());
    std::fflush(stdout);
  }
  ctx.live = std::make_unique<LiveSession>(
      *r.system, lc, [&ctx](const Outgoing& m) { ctx.hub.broadcast(m); }, std::move(exercise));
  if (!ctx.live->journal_ok()) {
    spdlog::error("{}", ctx.live->journal_error());
    return 1;
  }
  // Without the privilege for a real-time loop, the loop's share of the cores is what the
  // scheduler's fairness gives it; lowering the priority of this thread before it starts the
  // network and worker threads (which take it over) lets the loop go first when a flood of
  // requests or a sweep keeps them busy. Any thread may lower its own priority.
  if (!ctx.live->realtime()) {
    if (setpriority(PRIO_PROCESS, 0, getpriority(PRIO_PROCESS, 0) + kNetworkNiceness) == 0)
      spdlog::info("network and worker threads at niceness +{}, so the loop goes first", kNetworkNiceness);
  }
  ctx.replay_pool = std::make_unique<net::thread_pool>(std::max<std::size_t>(1, opt.replay_workers));
  ctx.run_on_workers = [pool = ctx.replay_pool.get()](std::function<void()> job) { net::post(*pool, std::move(job)); };
  ctx.api = std::make_unique<Api>(ctx);

  auto listener = std::make_shared<Listener>(ioc, tcp::endpoint{address, opt.port}, ctx, ec);
  if (ec) {
    spdlog::error("cannot listen on {}:{}: {}", opt.host, opt.port, ec.message());
    return 1;
  }
  listener->run();
  spdlog::info("droopline serving \"{}\" on http://{}:{}/ (stream ws://{}:{}/api/v1/stream)", r.system->def().name, opt.host,
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
