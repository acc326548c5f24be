#include "hub.hpp"

#include "websocket_session.hpp"

namespace droopline::server {

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

}  // namespace droopline::server
