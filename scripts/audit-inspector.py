#!/usr/bin/env python3
"""A scripted inspector for the audit walk-through on the demo survey.

Reads a campaign's audit sample (audit-sample.json) and the demo's truth
table (written by `zvet demo --write`), and appends to reviews/NAME.jsonl one
verdict per sample object carrying the true class and redshift — what a
careful inspector would record. Only for the invented demo, whose truth is
known; real campaigns are vetted in the window.

    python3 scripts/audit-inspector.py CAMPAIGN TRUTH.csv [NAME]
"""
import csv
import datetime
import json
import os
import sys

camp, truth_path = sys.argv[1], sys.argv[2]
name = sys.argv[3] if len(sys.argv) > 3 else "script"
sample = json.load(open(os.path.join(camp, "audit-sample.json")))
truth = {r["id"]: r for r in csv.DictReader(open(truth_path))}
log = os.path.join(camp, "reviews", name + ".jsonl")
seq = 0
if os.path.exists(log):
    seq = sum(1 for _ in open(log))
t0 = datetime.datetime(2026, 12, 2, 9, 0, 0)
with open(log, "a") as f:
    for i, m in enumerate(sample["members"]):
        t = truth[m["id"]]
        seq += 1
        ev = {"v": 1, "seq": seq, "time": (t0 + datetime.timedelta(seconds=30 * i)).strftime("%Y-%m-%dT%H:%M:%SZ"),
              "inspector": name, "object_id": m["id"], "action": "verdict"}
        if t["class"] in ("galaxy", "quasar", "star"):
            ev.update({"class": t["class"], "z": float(t["z"]), "source": "typed", "confidence": "secure"})
        else:
            ev.update({"class": "unclear", "confidence": "secure"})
        f.write(json.dumps(ev) + "\n")
print(f"{len(sample['members'])} verdicts appended to {log}")
