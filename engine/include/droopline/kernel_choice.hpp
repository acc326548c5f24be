#pragma once
/// The instruction-set variant of the integration kernels, for every engine in the process.
/// GCC builds on x86-64 carry three (AVX-512, AVX2, baseline); other builds one portable variant.
/// All give the same bits: floating-point contraction is off and the kernels use element-wise IEEE
/// operations only, so the choice changes speed, never results.
#include <string>
#include <string_view>

namespace droopline {

/// Chooses "avx512", "avx2" or "baseline" (the default is the widest the processor runs). False,
/// with the reason, for an unknown name or one this processor cannot run. Call it before any
/// engine steps.
bool use_kernels(std::string_view variant, std::string& error);
/// The variant in use ("avx512", "avx2" or "baseline").
const char* kernels_in_use();
/// False for a build with the portable variant only (every name then selects it).
bool kernel_variants_built();

}  // namespace droopline
