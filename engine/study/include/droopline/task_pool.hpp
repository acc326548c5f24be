#pragma once
// A small fork-join pool for the engine's TaskRunner: the caller runs task 0, workers the rest.
// Workers spin briefly between calls (a stage takes tens of microseconds) and then sleep.
#include <atomic>
#include <cstddef>
#include <cstdint>
#include <thread>
#include <vector>

#include "droopline/engine.hpp"

namespace droopline {

class TaskPool final : public TaskRunner {
 public:
  /// `threads` counts the caller: 1 means no worker thread at all.
  explicit TaskPool(std::size_t threads);
  ~TaskPool() override;
  TaskPool(const TaskPool&) = delete;
  TaskPool& operator=(const TaskPool&) = delete;

  std::size_t concurrency() const override { return workers_.size() + 1; }
  void run(std::size_t count, void (*fn)(void*, std::size_t, std::size_t), void* ctx) override;

 private:
  void work(std::size_t index);

  std::vector<std::thread> workers_;
  std::atomic<std::uint64_t> generation_{0};
  std::atomic<std::size_t> busy_{0};
  std::atomic<bool> stop_{false};
  void (*fn_)(void*, std::size_t, std::size_t) = nullptr;
  void* ctx_ = nullptr;
  std::size_t count_ = 0;
};

}  // namespace droopline
