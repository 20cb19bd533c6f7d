"""Two invented inspectors' review logs for the screenshot campaign: both accept the
automatic answer on the first 16 objects of the fit cache, except that ben
disagrees on four (another class, or another z).
Run: python3 assets/screenshot_logs.py CAMPAIGN_DIR (after `zvet campaign init … --fit`)."""
import json, sys, datetime
camp = sys.argv[1]
fits = [json.loads(l) for l in open(f"{camp}/fits.jsonl") if l.strip()]
fits = [f for f in fits if f.get("candidates")][:16]
t0 = datetime.datetime(2026, 11, 30, 9, 0, 0)
def ev(who, seq, oid, fit, change, k):
    t = (t0 + datetime.timedelta(minutes=k)).strftime("%Y-%m-%dT%H:%M:%SZ")
    best = fit["candidates"][0]
    d = {"v": 1, "seq": seq, "time": t, "inspector": who, "object_id": oid,
         "fit": {"class": best["class"], "z": best["z"], "chi2": best["chi2"]}}
    d.update(change)
    return json.dumps(d, ensure_ascii=False)
for who in ["ana", "ben"]:
    lines = []
    seq = 0
    for k, f in enumerate(fits):
        b = f["candidates"][0]
        cls, z, src, conf = b["class"], b["z"], "automatic", "solid"
        if who == "ben" and k in (1, 4, 7, 10):
            other = next((c for c in f["candidates"][1:] if c["class"] != b["class"]), None)
            if other is not None and k != 7:
                cls, z, src, conf = other["class"], other["z"], "candidate", "tentative"
            else:
                z, src = b["z"] * 1.02 + 0.02, "typed"
        seq += 1
        lines.append(ev(who, seq, f["id"], f, {"action": "verdict", "class": cls, "z": z,
                                             "z_err": None if src == "typed" else b["z_err"],
                                             "source": src, "confidence": conf}, k))
        if who == "ben" and k == 4:
            seq += 1
            lines.append(ev(who, seq, f["id"], f, {"action": "flag", "flag": "single_line", "on": True}, k))
            seq += 1
            lines.append(ev(who, seq, f["id"], f, {"action": "note", "text": "one line only; could be [O II]"}, k))
        if who == "ana" and k == 4:
            seq += 1
            lines.append(ev(who, seq, f["id"], f, {"action": "note", "text": "continuum shape fits"}, k))
    open(f"{camp}/reviews/{who}.jsonl", "w").write("\n".join(lines) + "\n")
print([f["id"] for f in fits])
