#pragma once
// A hint to the kernel about a large buffer that is about to be written from start to end.
#include <cstddef>

namespace droopline::detail {

/// Asks for the pages of [p, p + bytes) up front: 2 MiB pages where the range holds whole ones,
/// then every page made present in one call, instead of one page fault per 4 KiB page as the
/// buffer is first written (on a virtual machine each fault costs some 10 microseconds; a
/// 10,000-unit fleet's text and units take some 1,600 of them). Only a hint: the memory and its
/// contents are unchanged, small buffers are left alone, and where the kernel does not know the
/// advice (Linux before 5.14, other systems) nothing happens.
void prepare_pages(void* p, std::size_t bytes) noexcept;

}  // namespace droopline::detail
