# Warnings are PRIVATE to each of the project's targets; DROOPLINE_WERROR turns them into errors.
function(droopline_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic -Wshadow -Wconversion
                         -Wno-sign-conversion -Wnon-virtual-dtor -Wold-style-cast)
  if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU")
    # GCC 12 reports false -Wrestrict overlaps inside std::string concatenation (GCC bug 105329).
    target_compile_options(${target} PRIVATE -Wno-restrict)
  endif()
  if(DROOPLINE_WERROR)
    target_compile_options(${target} PRIVATE -Werror)
  endif()
endfunction()

# Results must not depend on whether the compiler fuses a*b+c into one rounding. Floating-point
# exceptions are never trapped, so the vectorizer may evaluate both sides of a select
# (-fno-trapping-math changes no result, only what the compiler must preserve).
function(droopline_strict_fp target)
  target_compile_options(${target} PRIVATE -ffp-contract=off -fno-fast-math -fno-trapping-math)
endfunction()
