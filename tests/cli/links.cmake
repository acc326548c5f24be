# The droopline program's shared libraries (ctest `program_links`): glibc's, SQLite and NLopt only.
# The C++ runtime is linked in and spdlog/fmt come from their headers (server/CMakeLists.txt); a
# shared libstdc++, libspdlog or libfmt back in the list means the start-up cost measured in the
# README ("Starting the process") is back too.
execute_process(COMMAND readelf -d ${BIN} OUTPUT_VARIABLE out RESULT_VARIABLE rc)
if(NOT rc EQUAL 0)
  message(FATAL_ERROR "readelf -d ${BIN} failed (${rc})")
endif()
string(REGEX MATCHALL "Shared library: \\[[^]]+\\]" needed "${out}")
if(NOT needed)
  message(FATAL_ERROR "readelf -d ${BIN} listed no shared libraries:\n${out}")
endif()
foreach(lib IN LISTS needed)
  if(lib MATCHES "libstdc\\+\\+|libgcc_s|libspdlog|libfmt")
    message(FATAL_ERROR "droopline needs ${lib}; expected the C++ runtime, spdlog and fmt built in")
  endif()
endforeach()
message(STATUS "${needed}")
