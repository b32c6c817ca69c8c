#!/usr/bin/env bash
# Run every command on every sample case and keep all outputs (files, stdout, stderr, exit
# status) under DEST, for `diff -r` before and after a change that must not alter outputs:
#
#   cargo build --release && scripts/sample-outputs.sh /tmp/before
#   ... change ...
#   cargo build --release && scripts/sample-outputs.sh /tmp/after && diff -r /tmp/before /tmp/after
#
# Outputs are written to a fixed scratch directory first (RUN, default
# /tmp/edgetherm-sample-run) so that the paths printed in the text are the same in every run.
# B overrides the binary, SAMPLES the sample directory.
set -u
root="$(cd "$(dirname "$0")/.." && pwd)"
B=${B:-$root/target/release/edgetherm}
DEST=${1:?usage: scripts/sample-outputs.sh DEST}
O=${RUN:-/tmp/edgetherm-sample-run}
S=${SAMPLES:-$root/sample-measurements}
rm -rf "$O" "$DEST"
mkdir -p "$O"
run() {
  name=$1
  shift
  "$B" "$@" >"$O/$name.stdout" 2>"$O/$name.stderr"
  echo "exit $?" >>"$O/$name.stdout"
}
for c in cold-plate fin-root busbar-clamp mould-insert; do run "check-$c" check "$S/$c"; done
run est-mould estimate "$S/mould-insert" --out "$O/est-mould" --limit 150
run est-cold estimate "$S/cold-plate" --out "$O/est-cold" --limit 45
run est-cold-nb estimate "$S/cold-plate" --out "$O/est-cold-nb" --no-bounds
run est-cold-mg estimate "$S/cold-plate" --out "$O/est-cold-mg" --max-gradient 2 --strength gcv
run est-cold-disc estimate "$S/cold-plate" --out "$O/est-cold-disc" --strength discrepancy --keep-all
run est-cold-ex estimate "$S/cold-plate" --out "$O/est-cold-ex" --exclude TC02
run est-fin estimate "$S/fin-root" --out "$O/est-fin" --limit 80
run sim-cold simulate "$S/cold-plate" --truth "$S/cold-plate/truth-profile.csv" --noise 0.15 --seed 7 --out "$O/sim-cold.csv"
run sim-fin simulate "$S/fin-root" --truth "$S/fin-root/truth-profile.csv" --noise 0.2 --seed 7 --out "$O/sim-fin.csv"
run design-cold design "$S/cold-plate" --count 6 --out "$O/design-cold"
run design-cold-w design "$S/cold-plate" --count 6 --criterion worst --out "$O/design-cold-w"
run track-bus track "$S/busbar-clamp" --log "$S/busbar-clamp/log.csv" --out "$O/track-bus" --limit 70
run track-bus-cal track "$S/busbar-clamp" --log "$S/busbar-clamp/log.csv" --out "$O/track-bus-cal" --calibrate 50
run track-bus-mg track "$S/busbar-clamp" --log "$S/busbar-clamp/log.csv" --out "$O/track-bus-mg" --max-gradient 3
# round parts (the feedwater pipe), when the sample set has them
if [ -d "$S/feedwater-pipe" ]; then
  run check-pipe check "$S/feedwater-pipe"
  run est-pipe estimate "$S/feedwater-pipe" --out "$O/est-pipe" --limit 200 --max-gradient 2
  run sim-pipe simulate "$S/feedwater-pipe" --truth "$S/feedwater-pipe/truth-profile.csv" --noise 0.3 --seed 7 --out "$O/sim-pipe.csv" --field "$O/sim-pipe-field.csv"
  run design-pipe design "$S/feedwater-pipe" --count 6 --out "$O/design-pipe"
fi
mv "$O" "$DEST"
