#pragma once
// The set of streaming clients: the live session's frames and events are handed
// to each.
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "live_session.hpp"

namespace droopline::server {

class WebsocketSession;

/// The set of streaming clients.
class Hub {
 public:
  void join(const std::shared_ptr<WebsocketSession>& s);
  void leave(const WebsocketSession* s);
  /// Hands the message to every client (each queues it on its own strand).
  /// Never blocks.
  void broadcast(const Outgoing& msg);
  /// Sends every client a close frame with `reason`.
  void close_all(const std::string& reason);
  std::size_t size() const;

 private:
  using List = std::vector<std::weak_ptr<WebsocketSession>>;
  // Copied on join and leave (rare), never on a broadcast (20 a second): a broadcast takes the
  // current list under the lock and walks it outside.
  std::shared_ptr<const List> list() const;

  mutable std::mutex mutex_;
  std::shared_ptr<const List> sessions_ = std::make_shared<const List>();
};

}  // namespace droopline::server
