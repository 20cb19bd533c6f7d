#!/bin/bash
# Memory of the review window on the built-in demo (500 objects), under Xvfb:
# resident memory (VmRSS) and its peak (VmHWM) when the window is up, after
# WAIT seconds of background fits, and after stepping through 60 objects with N.
# Run from the project root after `cargo build --release`; needs Xvfb and xdotool.
# Logs and settings go to a temporary HOME.
set -u
ZVET=${ZVET:-$PWD/target/release/zvet}
d=$(mktemp -d); export HOME=$d/home XDG_DATA_HOME=$d/data XDG_CONFIG_HOME=$d/config; mkdir -p "$HOME"
disp=:$((260 + RANDOM % 30)); Xvfb $disp -screen 0 1600x1000x24 >/dev/null 2>&1 & xpid=$!
sleep 1; export DISPLAY=$disp
"$ZVET" review --inspector mem >"$d/gui.log" 2>&1 & gpid=$!
for i in $(seq 1 40); do wid=$(xdotool search --pid $gpid 2>/dev/null | head -1); [ -n "$wid" ] && break; sleep 0.25; done
rss() { awk '/VmRSS|VmHWM/ {printf "%s %s MB  ", $1, int($2/1024)}' /proc/$gpid/status; echo; }
echo -n "window up:            "; rss
sleep ${WAIT:-60}
echo -n "after ${WAIT:-60} s (fits):   "; rss
xdotool windowfocus --sync "$wid" 2>/dev/null
for i in $(seq 1 60); do xdotool key --delay 50 n; sleep 0.3; done
sleep 3
echo -n "after 60 objects shown: "; rss
kill $gpid; wait $gpid 2>/dev/null; kill $xpid
