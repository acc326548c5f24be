#!/usr/bin/env bash
# droopline developer entry point: one script for set-up, build, tests, the demo and benchmarks.
#   bash scripts/dev.sh demo    install what is missing, build, serve the bundled demo scenario live
#   bash scripts/dev.sh test    install what is missing, build with warnings as errors, run all tests
#   bash scripts/dev.sh exercise [NAME]   serve a shipped exercise (scenarios/exercises/NAME.json; default peak_unit_loss)
#   bash scripts/dev.sh setup | build | sanitize | fuzz [SECONDS] | bench | stream-bench | soak [--minutes M]
set -euo pipefail
cd "$(dirname "$0")/.."

# Debian 12 packages the build, the tests and the benchmarks need.
PACKAGES=(cmake ninja-build g++ pkg-config libboost-dev nlohmann-json3-dev libspdlog-dev libsqlite3-dev libnlopt-cxx-dev catch2
          python3-scipy python3-numpy python3-websockets libeigen3-dev libcli11-dev chromium clang libclang-rt-14-dev)

setup() {
  local missing=()
  for p in "${PACKAGES[@]}"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  local sudo=""
  [ "$(id -u)" -eq 0 ] || sudo="sudo"
  if [ ${#missing[@]} -eq 0 ]; then
    echo "setup: all ${#PACKAGES[@]} packages present"
  else
    echo "setup: installing ${missing[*]}"
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${missing[@]}"
  fi
  # The page's npm packages (uPlot; playwright-core for the browser tests), from the lock file.
  if ! command -v npm >/dev/null; then
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq nodejs npm
  fi
  if [ ! -d web/node_modules/uplot ] || [ web/package-lock.json -nt web/node_modules/.package-lock.json ]; then
    npm ci --prefix web --no-audit --no-fund --silent
  fi
}

build() {  # build PRESET
  local preset="${1:-release}"
  cmake --preset "$preset" >/dev/null
  cmake --build --preset "$preset" -j "$(nproc)"
}

case "${1:-}" in
  setup) setup ;;
  build) setup; build release ;;
  test)
    setup
    build ci
    ctest --preset ci -j "$(nproc)"
    ;;
  sanitize)
    # The whole suite under AddressSanitizer + UndefinedBehaviorSanitizer, and the server's
    # threads (integration, page, task pool) under ThreadSanitizer: any report fails the run.
    setup
    build asan
    ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1 ctest --preset asan -j "$(nproc)"
    build tsan
    TSAN_OPTIONS=halt_on_error=1 ctest --preset tsan -j "$(nproc)" -R "server_integration|server_faults|server_hostile|test_live_session|web_page|test_models"
    ;;
  fuzz)
    # Each libFuzzer target for a bounded time from the committed seed corpus (copied, so the
    # corpus in the tree stays as committed): a crash, leak or a 1 s hang fails the run.
    setup
    build fuzz
    seconds="${2:-60}"
    for target in scenario commands target exercise; do
      work="$(mktemp -d)"
      cp -r "tests/fuzz/corpus/$target/." "$work/"
      (cd "$work" && "$OLDPWD/build/fuzz/tests/fuzz/fuzz_$target" "$work" -max_total_time="$seconds" \
         -timeout=1 -rss_limit_mb=2048 -print_final_stats=1 2>&1 | tail -n 4)
      rm -rf "$work"
    done
    ;;
  demo)
    setup
    build release
    scenario="${2:-scenarios/demo_three_areas.json}"
    mkdir -p out
    echo "demo: open http://127.0.0.1:8080/ (Ctrl-C stops; the session journal goes to out/demo-journal.jsonl)"
    exec ./build/release/server/droopline serve --scenario "$scenario" --listen 127.0.0.1:8080 \
      --journal out/demo-journal.jsonl
    ;;
  exercise)
    setup
    build release
    exercise="scenarios/exercises/${2:-peak_unit_loss}.json"
    mkdir -p out
    echo "exercise: instructor http://127.0.0.1:8080/?view=instructor, seats /?view=seat, wall /?view=wall"
    echo "          (the instructor token and each seat's join code are printed below; Ctrl-C stops)"
    exec ./build/release/server/droopline serve --exercise "$exercise" --listen 127.0.0.1:8080 \
      --journal out/exercise-journal.jsonl
    ;;
  bench)
    setup
    build release
    ./build/release/tests/bench/droopline-bench "${@:2}"
    ;;
  stream-bench)
    setup
    build release
    # The Node.js peer: node and npm as the machine has them, else Debian's.
    if ! command -v npm >/dev/null; then
      [ "$(id -u)" -eq 0 ] && apt-get install -y -qq nodejs npm || sudo apt-get install -y -qq nodejs npm
    fi
    npm install --prefix tests/bench --no-audit --no-fund --silent
    ./build/release/tests/bench/droopline-stream-bench "${@:2}"
    ;;
  soak)
    setup
    build release
    ./build/release/tests/bench/droopline-soak "${@:2}"
    ;;
  *)
    sed -n '2,7p' "$0" | sed 's/^# \{0,1\}//'
    exit 2
    ;;
esac
