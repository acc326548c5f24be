#pragma once
// `droopline serve`: the service's start-up, the command line's one way in (no Beast here).
#include "services.hpp"

namespace droopline::server {

/// Runs the service until SIGINT/SIGTERM. Returns the process exit code.
int serve(Options options);

}  // namespace droopline::server
