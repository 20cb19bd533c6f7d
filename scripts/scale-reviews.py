#!/usr/bin/env python3
"""Two inspectors' review logs for a demo campaign, from the demo's truth
table (for scripts/scale-bench.sh: merge, export and report need verdicts).

Usage: scripts/scale-reviews.py TRUTH.csv CAMPAIGN_DIR

`ann` gives every object its true class and redshift; `ben` does the same
but calls every 25th object a star, so the merge has conflicts to list.
Lines are review-log events (format version 1, one JSON object per line) as
zvet's review window writes them.
"""
import csv
import datetime
import json
import pathlib
import sys

truth, camp = pathlib.Path(sys.argv[1]), pathlib.Path(sys.argv[2])
now = datetime.datetime.now(datetime.timezone.utc).isoformat().replace("+00:00", "Z")
(camp / "reviews").mkdir(parents=True, exist_ok=True)
for who, odd in (("ann", False), ("ben", True)):
    with open(truth, newline="") as t, open(camp / "reviews" / f"{who}.jsonl", "w") as out:
        for k, row in enumerate(csv.DictReader(t)):
            cls = row["class"] or "unclear"
            if odd and k % 25 == 0:
                cls = "star"
            z = float(row["z"]) if cls != "unclear" else None
            event = {
                "v": 1,
                "seq": k + 1,
                "time": now,
                "inspector": who,
                "object_id": row["id"],
                "fit": None,
                "action": "verdict",
                "class": cls,
                "z": z,
                "z_err": None,
                "source": "typed",
                "confidence": "secure",
            }
            out.write(json.dumps(event) + "\n")
