#include "hub.hpp"

#include "websocket_session.hpp"

namespace droopline::server {

void Hub::join(const std::shared_ptr<WebsocketSession>& s) {
  std::lock_guard lock(mutex_);
  auto next = std::make_shared<List>(*sessions_);
  next->push_back(s);
  sessions_ = std::move(next);
}

void Hub::leave(const WebsocketSession* s) {
  std::lock_guard lock(mutex_);
  auto next = std::make_shared<List>(*sessions_);
  std::erase_if(*next, [s](const std::weak_ptr<WebsocketSession>& w) {
    auto p = w.lock();
    return !p || p.get() == s;
  });
  sessions_ = std::move(next);
}

std::shared_ptr<const Hub::List> Hub::list() const {
  std::lock_guard lock(mutex_);
  return sessions_;
}

void Hub::broadcast(const Outgoing& msg) {
  for (const auto& w : *list())
    if (auto s = w.lock()) WebsocketSession::deliver(std::move(s), msg);
}

void Hub::close_all(const std::string& reason) {
  for (const auto& w : *list())
    if (auto s = w.lock()) s->close(websocket::close_code::going_away, reason);
}

std::size_t Hub::size() const { return list()->size(); }

}  // namespace droopline::server
