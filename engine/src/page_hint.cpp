#include "droopline/page_hint.hpp"

#include <cstdint>

#if defined(__linux__)
#include <sys/mman.h>
#endif

namespace droopline::detail {

void prepare_pages(void* p, std::size_t bytes) noexcept {
#if defined(__linux__)
  constexpr std::size_t kWorthIt = 256 * 1024;  // below this, a few faults cost less than the calls
  constexpr std::uintptr_t kPage = 4096, kLarge = 2 * 1024 * 1024;
  constexpr int kPopulateWrite = 23;  // MADV_POPULATE_WRITE (Linux 5.14); glibc 2.36 lacks the name
  if (!p || bytes < kWorthIt) return;
  const auto begin = reinterpret_cast<std::uintptr_t>(p), end = begin + bytes;
  // Whole 2 MiB pages inside the buffer only, so no neighbour's memory changes its page size.
  const std::uintptr_t large_begin = (begin + kLarge - 1) & ~(kLarge - 1), large_end = end & ~(kLarge - 1);
  if (large_end > large_begin)
    (void)madvise(reinterpret_cast<void*>(large_begin), large_end - large_begin, MADV_HUGEPAGE);
  // From the start of the buffer's first page: the part before it is already someone's memory
  // and is only made present, never changed.
  const std::uintptr_t first = begin & ~(kPage - 1);
  (void)madvise(reinterpret_cast<void*>(first), end - first, kPopulateWrite);
#else
  (void)p;
  (void)bytes;
#endif
}

}  // namespace droopline::detail
