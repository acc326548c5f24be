#include "droopline/task_pool.hpp"

#include <thread>

namespace droopline {
namespace {
// Plain reloads, no PAUSE instruction: under hypervisors that exit on PAUSE loops a spinning
// vCPU gets descheduled, which measured here as two threads running slower than one.
constexpr int kSpins = 20000;  // roughly 50-100 us before sleeping on the futex
inline void relax() { asm volatile("" ::: "memory"); }
}  // namespace

TaskPool::TaskPool(std::size_t threads) {
  for (std::size_t i = 1; i < threads; ++i) workers_.emplace_back([this, i] { work(i); });
}

TaskPool::~TaskPool() {
  stop_.store(true, std::memory_order_release);
  generation_.fetch_add(1, std::memory_order_release);
  generation_.notify_all();
  for (auto& t : workers_) t.join();
}

void TaskPool::run(std::size_t count, void (*fn)(void*, std::size_t, std::size_t), void* ctx) {
  if (count == 0) return;
  if (workers_.empty() || count == 1) {
    for (std::size_t i = 0; i < count; ++i) fn(ctx, i, count);
    return;
  }
  fn_ = fn;
  ctx_ = ctx;
  count_ = count;
  busy_.store(workers_.size(), std::memory_order_relaxed);
  generation_.fetch_add(1, std::memory_order_release);  // publishes fn_, ctx_, count_
  generation_.notify_all();
  // The caller takes task 0 and any task beyond the workers.
  for (std::size_t i = 0; i < count; i += workers_.size() + 1) fn(ctx, i, count);
  // Spin a little, then give the core away between looks: on a machine busy with other work the
  // worker may be waiting for this very core, and spinning through whole time slices made a
  // 10,000-unit run on two threads take 3 to 24 s instead of 0.4 s.
  for (int spin = 0; busy_.load(std::memory_order_acquire) != 0; ++spin) {
    if (spin < kSpins)
      relax();
    else
      std::this_thread::yield();
  }
}

void TaskPool::work(std::size_t index) {
  std::uint64_t seen = 0;
  for (;;) {
    std::uint64_t now = generation_.load(std::memory_order_acquire);
    for (int spin = 0; now == seen && spin < kSpins; ++spin) {
      relax();
      now = generation_.load(std::memory_order_acquire);
    }
    while (now == seen) {
      generation_.wait(seen, std::memory_order_acquire);
      now = generation_.load(std::memory_order_acquire);
    }
    seen = now;
    if (stop_.load(std::memory_order_acquire)) return;
    const std::size_t stride = workers_.size() + 1;
    for (std::size_t i = index; i < count_; i += stride) fn_(ctx_, i, count_);
    busy_.fetch_sub(1, std::memory_order_release);
  }
}

}  // namespace droopline
