#!/bin/bash
# A scripted review under Xvfb, driven with xdotool like an inspector at the keyboard:
# on a fitted demo campaign, review 20 objects with Space then N, go back to one of them
# (B), press Space there — then read the review log: exactly 20 verdicts on 20 objects,
# and the revisit + Space added nothing. A second Space after C (another candidate) must
# ask rather than write, and Esc keeps the verdict.
# Run from the project root after `cargo build --release`. Needs Xvfb and xdotool
# (apt-get install -y xvfb xdotool). Exit 0 when the log is as expected.
set -u
ZVET=${ZVET:-$(pwd)/target/release/zvet}
[ -x "$ZVET" ] || { echo "build first: cargo build --release"; exit 2; }
d=$(mktemp -d); export HOME=$d/home XDG_DATA_HOME=$d/data XDG_CONFIG_HOME=$d/config; mkdir -p "$HOME"
"$ZVET" demo --write "$d/demo" >/dev/null 2>&1 || { echo "demo --write failed"; exit 1; }
"$ZVET" campaign init "$d/camp" --spectra "$d/demo/spectra" --catalog "$d/demo/catalog.csv" \
  --inspector run --fit >/dev/null 2>&1 || { echo "campaign init --fit failed"; exit 1; }
disp=:$((200 + RANDOM % 50)); Xvfb $disp -screen 0 1600x1000x24 >/dev/null 2>&1 & xpid=$!
sleep 1; export DISPLAY=$disp
"$ZVET" review --campaign "$d/camp" --inspector run >"$d/gui.log" 2>&1 & gpid=$!
for i in $(seq 1 40); do wid=$(xdotool search --pid $gpid 2>/dev/null | head -1); [ -n "$wid" ] && break; sleep 0.25; done
[ -n "${wid:-}" ] || { kill $gpid $xpid; echo "no window appeared"; exit 1; }
# Wait until the first object has a fit to accept (background fits for display).
sleep 8; xdotool windowfocus --sync "$wid" 2>/dev/null
k() { xdotool key --delay 120 "$@"; sleep 0.5; }
log=$d/camp/reviews/run.jsonl
for i in $(seq 1 20); do k space; k n; done
sleep 1; cp "$log" "$d/after20.jsonl"
k b; k space            # revisit the 20th object: Space keeps its verdict
k c; k space           # another candidate on screen: Space asks…
# SHOT=file.png keeps a screenshot of the window while it asks.
[ -n "${SHOT:-}" ] && { sleep 0.5; import -window root "$SHOT"; }
k Escape               # …and Esc keeps the recorded verdict
sleep 1
kill $gpid 2>/dev/null; wait $gpid 2>/dev/null; kill $xpid 2>/dev/null
python3 - "$d/after20.jsonl" "$log" <<'PY'
import json, sys
before = [json.loads(l) for l in open(sys.argv[1]) if l.strip()]
after = [json.loads(l) for l in open(sys.argv[2]) if l.strip()]
verdicts = [e for e in before if e["action"] == "verdict"]
objs = {e["object_id"] for e in verdicts}
if len(verdicts) != 20 or len(objs) != 20:
    print(f"FAIL: expected 20 verdicts on 20 objects after 20 × Space/N, got {len(verdicts)} on {len(objs)}"); sys.exit(1)
if any(e.get("z") is None or e.get("confidence") is None for e in verdicts):
    print("FAIL: a verdict without a redshift or a certainty"); sys.exit(1)
if after != before:
    extra = after[len(before):]
    print(f"FAIL: the revisit changed the log: {extra}"); sys.exit(1)
print(f"ok: 20 objects reviewed with Space/N; revisit + Space (and C, Space, Esc) left the log unchanged ({len(after)} events)")
PY
