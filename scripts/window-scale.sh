#!/bin/bash
# The review window on a fitted campaign, under Xvfb, measured by the window
# itself (ZVET_WINDOW_TIMES, see src/ui/timing.rs) and by /proc:
#   - open: wall time from the launch of `zvet review --campaign DIR` to the
#     end of the first frame that drew an object (the window's own figure is
#     printed beside it);
#   - switch: N presses of `n` (next object), each the selection with its
#     reads plus the frame that draws it; median and largest;
#   - sort/filter: the queue sorted by z, by id, by "needs a look", and the
#     re-sort button, each timed by the window;
#   - memory: resident (VmRSS) and peak (VmHWM) after the open and at the end.
#
#   cargo build --release
#   scripts/window-scale.sh CAMPAIGN_DIR [N]     # N switches, default 60
#
# The inspector is $INSPECTOR (default ann: scripts/scale-bench.sh writes
# ann's and ben's logs, so the window opens a log of N events as an inspector
# coming back would); the window writes its resume file beside that log.
# Needs Xvfb and xdotool. Prints one Markdown table row.
set -u
CAMP=${1:?usage: window-scale.sh CAMPAIGN_DIR [N]}
NSW=${2:-60}
ZVET=${ZVET:-$PWD/target/release/zvet}
WHO=${INSPECTOR:-ann}
[ -x "$ZVET" ] || { echo "build first: cargo build --release" >&2; exit 2; }
d=$(mktemp -d)
export HOME=$d/home XDG_DATA_HOME=$d/data XDG_CONFIG_HOME=$d/config
mkdir -p "$HOME"
disp=${XDISPLAY:-:$((260 + RANDOM % 30))}
xpid=
if ! xdpyinfo -display "$disp" >/dev/null 2>&1; then
    Xvfb "$disp" -screen 0 1600x1000x24 >/dev/null 2>&1 &
    xpid=$!
    sleep 1
fi
export DISPLAY=$disp
times=$d/times.txt
: >"$times"
t0=$(date +%s.%N)
ZVET_WINDOW_TIMES=$times "$ZVET" review --campaign "$CAMP" --inspector "$WHO" >"$d/gui.log" 2>&1 &
gpid=$!
cleanup() { kill "$gpid" 2>/dev/null; wait "$gpid" 2>/dev/null; [ -n "$xpid" ] && kill "$xpid" 2>/dev/null; }
trap cleanup EXIT
for _ in $(seq 1 2400); do
    grep -q first_object_drawn "$times" && break
    kill -0 "$gpid" 2>/dev/null || { echo "the window ended (see $d/gui.log)" >&2; exit 1; }
    sleep 0.05
done
t1=$(date +%s.%N)
mem() { awk '/VmRSS|VmHWM/ {printf "%s %d MB ", $1, $2/1024}' "/proc/$gpid/status"; }
open_mem=$(mem)
wid=$(xdotool search --pid "$gpid" 2>/dev/null | head -1)
xdotool windowfocus --sync "$wid" 2>/dev/null
sleep 2
for _ in $(seq 1 "$NSW"); do
    xdotool key n
    sleep 0.25
done
sleep 1
# the queue: sort by z, by id, by need of a look (the sort box's menu), re-sort
click() { xdotool mousemove --window "$wid" "$1" "$2" click 1; sleep 0.6; }
# (places in the 1560×960 window, as laid out by this version; the menu's
# items are 23 pixels apart: needs a look, id, z, Δχ², S/N, …)
SORT_X=${SORT_X:-60} SORT_Y=${SORT_Y:-221}
for item in 2 1 0; do
    click "$SORT_X" "$SORT_Y"
    click "$SORT_X" $((SORT_Y + 28 + 23 * item))
done
click "${RESORT_X:-180}" "$SORT_Y"
sleep 1
end_mem=$(mem)
n_obj=$(awk '/first_object_drawn/ {print $4}' "$times")
awk -v a="$t0" -v b="$t1" -v n="$n_obj" -v om="$open_mem" -v em="$end_mem" '
    /first_object_drawn/ { own = $2 }
    /switch_ms/ { s[++k] = $2 }
    /queue_ms/ { q = q sprintf("%s %.1f ms, ", $3, $2) }
    END {
        m = 0; for (i = 1; i <= k; i++) if (s[i] > m) m = s[i]
        # median
        for (i = 1; i <= k; i++) for (j = i + 1; j <= k; j++) if (s[j] < s[i]) { t = s[i]; s[i] = s[j]; s[j] = t }
        med = k ? (k % 2 ? s[(k + 1) / 2] : (s[k / 2] + s[k / 2 + 1]) / 2) : 0
        printf "| %s | open %.2f s (window: %.2f s) | switch median %.1f ms, max %.1f ms (%d) | %s| at open: %s; end: %s|\n", n, b - a, own, med, m, k, q, om, em
    }' "$times"
cp "$times" "${TIMES_OUT:-/dev/null}" 2>/dev/null || true
