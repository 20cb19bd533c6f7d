#!/bin/bash
# Scale benchmark: build a demo campaign of N objects, fit it, and measure
# the wall time and peak resident memory of every command.
#
#   cargo build --release
#   scripts/scale-bench.sh 5000 [WORKDIR]       # WORKDIR default: target/scale-bench
#
# Prints one Markdown table row per command (objects, command, wall time,
# peak memory) and keeps them in WORKDIR/N/table.md. Peak memory is the
# process's VmHWM (ZVET_PEAK_MEMORY_FILE, see src/cli/mod.rs); wall time by
# the shell. `zvet fit` and `zvet campaign init --fit` each fit every object
# once (the slow part: about 9 ms of one core per 4000-pixel spectrum on an
# idle machine); `campaign fit` then finds everything cached. Needs python3
# (scripts/scale-reviews.py writes two inspectors' logs from the truth).
# With Xvfb and xdotool installed, the review window is measured last on the
# same campaign (scripts/window-scale.sh: open to the first object drawn,
# switch and draw, queue sorts, memory); its row follows the table.
set -euo pipefail
N=${1:?usage: scale-bench.sh N [WORKDIR]}
ROOT=${2:-target/scale-bench}/$N
ZVET=${ZVET:-$(pwd)/target/release/zvet}
[ -x "$ZVET" ] || { echo "build first: cargo build --release" >&2; exit 2; }
HERE=$(cd "$(dirname "$0")" && pwd)
rm -rf "$ROOT"; mkdir -p "$ROOT"
TABLE=$ROOT/table.md
: >"$TABLE"
run() { # name, then the command's arguments
    local name=$1; shift
    local peak=$ROOT/peak.txt t0 t1
    rm -f "$peak"
    t0=$(date +%s.%N)
    if ! ZVET_PEAK_MEMORY_FILE=$peak "$ZVET" "$@" >"$ROOT/$name.out" 2>"$ROOT/$name.err"; then
        echo "zvet $* failed (see $ROOT/$name.err)" >&2
    fi
    t1=$(date +%s.%N)
    local kb; kb=$(cat "$peak" 2>/dev/null || echo 0)
    awk -v n="$N" -v c="$name" -v a="$t0" -v b="$t1" -v kb="$kb" \
        'BEGIN { printf "| %s | `%s` | %.1f s | %.0f MB |\n", n, c, b - a, kb / 1024 }' | tee -a "$TABLE"
}
echo "| objects | command | wall time | peak memory |"
echo "|---:|---|---:|---:|"
run "demo --write" demo --write "$ROOT/demo" --objects "$N"
run "fit" fit "$ROOT/demo/spectra" --out "$ROOT/fits.csv"
run "campaign init --fit" campaign init "$ROOT/camp" --spectra "$ROOT/demo/spectra" \
    --catalog "$ROOT/demo/catalog.csv" --inspector ann --inspector ben --fit
run "campaign fit" campaign fit "$ROOT/camp"
python3 "$HERE/scale-reviews.py" "$ROOT/demo/truth.csv" "$ROOT/camp"
run "campaign status" campaign status "$ROOT/camp"
run "merge" merge "$ROOT/camp" --conflicts "$ROOT/conflicts.csv"
run "export" export "$ROOT/camp" --out "$ROOT/train.csv"
run "report" report "$ROOT/camp"
if command -v Xvfb >/dev/null && command -v xdotool >/dev/null; then
    echo
    echo "| objects | window open | switch and draw | queue sort / filter | memory |"
    echo "|---:|---|---|---|---|"
    ZVET=$ZVET TIMES_OUT=$ROOT/window-times.txt "$HERE/window-scale.sh" "$ROOT/camp" | tee -a "$TABLE"
else
    echo "(no Xvfb/xdotool: the window is not measured)" >&2
fi
