// The engine's step allocates nothing in its common path (secondary control, load noise, ramps,
// open disturbance windows): a counting global operator new around stretches of a shipped
// scenario without events. Events, trips and notices may allocate; they are rare.
#include <atomic>
#include <cstdlib>
#include <new>

#include "support.hpp"

// The sanitizers own every form of operator new; replacing one form beside them mismatches
// allocation and release, so the count runs in the plain builds only.
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
#define DL_COUNT_NEW 0
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer) || __has_feature(memory_sanitizer)
#define DL_COUNT_NEW 0
#endif
#endif
#ifndef DL_COUNT_NEW
#define DL_COUNT_NEW 1
#endif

namespace {
std::atomic<long> g_allocations{0};
}  // namespace

#if DL_COUNT_NEW
void* operator new(std::size_t size) {
  g_allocations.fetch_add(1, std::memory_order_relaxed);
  if (void* p = std::malloc(size ? size : 1)) return p;
  throw std::bad_alloc();
}
void operator delete(void* p) noexcept { std::free(p); }
void operator delete(void* p, std::size_t) noexcept { std::free(p); }
#endif

using namespace droopline;

namespace {

// Allocations made by stepping from the engine's time to `until_s`.
long allocations_stepping_to(Engine& e, double until_s) {
  const long before = g_allocations.load();
  while (e.time_s() < until_s - 1e-9) e.step();
  return g_allocations.load() - before;
}

}  // namespace

TEST_CASE("a step allocates nothing while secondary control, noise and metric windows run") {
  if (!DL_COUNT_NEW) return;                                      // a sanitizer build: nothing is counted
  auto e = test::make(test::load("scenarios/demo_island.json"));  // noise from t = 0, trip at 20 s
  test::run_until(*e, 1.0);
  CHECK(allocations_stepping_to(*e, 19.0) == 0);  // secondary control on its 2 s cycle, noise
  CHECK(allocations_stepping_to(*e, 21.0) > 0);   // the trip: a notice and a record (the counter counts)
  CHECK(allocations_stepping_to(*e, 60.0) == 0);  // the disturbance's windows open and closing
}

TEST_CASE("a step allocates nothing while a unit starts, a unit stops and schedules ramp") {
  if (!DL_COUNT_NEW) return;
  auto e = test::make(test::load("tests/data/operator_actions.json"));
  test::run_until(*e, 6.0);
  CHECK(allocations_stepping_to(*e, 34.0) == 0);  // HG3 starting (synchronises at 35 s)
  CHECK(allocations_stepping_to(*e, 36.0) > 0);   // synchronised: a notice and a record
  test::run_until(*e, 41.0);
  CHECK(allocations_stepping_to(*e, 79.0) == 0);  // HH2 unloading
  test::run_until(*e, 81.0);
  CHECK(allocations_stepping_to(*e, 139.0) == 0);  // both schedules ramping
}
