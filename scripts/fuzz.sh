#!/usr/bin/env bash
# Fuzz every target of fuzz/ with cargo-fuzz (libFuzzer), seeded from the samples and tests.
#
#   scripts/fuzz.sh                 # each target for 1,000,000 executions
#   RUNS=20000 scripts/fuzz.sh      # a short smoke run of each
#   scripts/fuzz.sh logger          # one target
#
# Installs a nightly toolchain and cargo-fuzz when they are missing (both from the ordinary
# registries: rustup and crates.io). Findings land in fuzz/artifacts/TARGET/; turn each into a
# regression test (tests/integration/hard_inputs.rs). Prints, per target, the executions, the
# time and the final coverage line.
set -euo pipefail
cd "$(dirname "$0")/.."

RUNS=${RUNS:-1000000}
JOBS=${CARGO_BUILD_JOBS:-1}
TARGETS=("$@")
if [ ${#TARGETS[@]} -eq 0 ]; then
  TARGETS=(plate_file sensors_csv readings_csv profile_csv logger case_pipeline)
fi

rustup toolchain list | grep -q '^nightly' || rustup toolchain install nightly --profile minimal
cargo +nightly fuzz --version >/dev/null 2>&1 || cargo +nightly install cargo-fuzz --locked

# seed corpora: the samples' files and the small cases of the tests
seed() {
  local target=$1
  local dir=fuzz/corpus/$target
  mkdir -p "$dir"
  case $target in
    plate_file)
      for f in sample-measurements/*/plate.toml; do cp "$f" "$dir/$(basename "$(dirname "$f")").toml"; done ;;
    sensors_csv) for f in sample-measurements/*/sensors.csv; do cp "$f" "$dir/$(basename "$(dirname "$f")").csv"; done ;;
    readings_csv) for f in sample-measurements/*/readings.csv; do cp "$f" "$dir/$(basename "$(dirname "$f")").csv"; done ;;
    profile_csv) printf 'position,temperature\n0,25\n75,40\n150,25\n' >"$dir/three-points.csv" ;;
    logger) head -c 20000 sample-measurements/busbar-clamp/log.csv >"$dir/busbar-head.csv" ;;
    case_pipeline)
      for c in cold-plate fin-root; do
        d=sample-measurements/$c
        { cat "$d/plate.toml"; printf '\0'; cat "$d/sensors.csv"; printf '\0'; cat "$d/readings.csv"; } >"$dir/$c.bin"
      done ;;
  esac
}

for t in "${TARGETS[@]}"; do
  seed "$t"
  echo "== $t: $RUNS executions"
  start=$(date +%s)
  CARGO_BUILD_JOBS=$JOBS cargo +nightly fuzz run --fuzz-dir fuzz "$t" "fuzz/corpus/$t" -- \
    -runs="$RUNS" -max_len=4096 -rss_limit_mb=2048 -timeout=20 2>&1 | tee "/tmp/edgetherm-fuzz-$t.log" | grep -E '^(#[0-9]+ +DONE|Done|==|INFO: Seed)' || true
  end=$(date +%s)
  echo "$t: $(( end - start )) s; last status: $(grep -E '^#[0-9]+' "/tmp/edgetherm-fuzz-$t.log" | tail -1)"
done
