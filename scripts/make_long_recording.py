#!/usr/bin/env python3
"""Write one long recording (for the bounded-memory figure of `tactread
decode --stream`, docs/benchmarks.md "Streaming"): a few simulated English
lines at 1 kHz with the default hex24 sensor, repeated end to end (time and
position continued, 5 mm between lines) until the wanted duration.

    scripts/make_long_recording.py --minutes 60 --out /tmp/long/hour.json

The frames file is CSV (about 150 MB per 10 minutes); do not commit it.
"""
import argparse
import json
import os
import subprocess
import sys

LINES = [
    "The ferry to Gannet Rock leaves the north quay at 9 and returns at 4.",
    "Seals rest on the shingle below the old boathouse; please keep dogs on a lead.",
    "Tide tables and maps of the marsh trail are at the kiosk by the car park.",
    "Quiet please: terns nest on the spit from April to July.",
]


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--minutes", type=float, required=True)
    ap.add_argument("--out", required=True, help="manifest path, ending in .json")
    ap.add_argument("--tactread", default="target/release/tactread")
    args = ap.parse_args()
    out_dir = os.path.dirname(os.path.abspath(args.out))
    os.makedirs(out_dir, exist_ok=True)
    parts = []
    for i, text in enumerate(LINES):
        path = os.path.join(out_dir, f"part{i}.json")
        if not os.path.exists(path):
            subprocess.run(
                [args.tactread, "simulate", text, "--rate", "1000", "--seed", str(i),
                 "--out", path, "--force"],
                check=True, stdout=subprocess.DEVNULL)
        with open(path) as f:
            manifest = json.load(f)
        with open(os.path.join(out_dir, manifest["frames"])) as f:
            header = f.readline().rstrip("\n")
            rows = []
            for line in f:
                t, p, rest = line.rstrip("\n").split(",", 2)
                rows.append((float(t), float(p), rest))
        parts.append((manifest, header, rows))
    header = parts[0][1]
    assert header.startswith("time_s,position_mm,"), header
    stem = os.path.splitext(os.path.basename(args.out))[0]
    frames_name = stem + ".csv"
    want = int(args.minutes * 60 * 1000)
    written = 0
    t_off = 0.0
    p_off = 0.0
    texts = []
    with open(os.path.join(out_dir, frames_name), "w") as f:
        f.write(header + "\n")
        while written < want:
            for manifest, _, rows in parts:
                if written >= want:
                    break
                t0, p0 = rows[0][0], rows[0][1]
                for t, p, rest in rows:
                    if written >= want:
                        break
                    f.write(f"{t - t0 + t_off:.6f},{p - p0 + p_off:.4f},{rest}\n")
                    written += 1
                t_off += rows[-1][0] - t0 + 0.001
                p_off += rows[-1][1] - p0 + 5.0
                texts.append(manifest.get("text", ""))
    manifest = dict(parts[0][0])
    manifest["frames"] = frames_name
    manifest["text"] = " ".join(texts)
    manifest["notes"] = f"{args.minutes} minutes at 1 kHz: simulated lines repeated end to end"
    with open(args.out, "w") as f:
        json.dump(manifest, f, indent=1)
    print(f"{written} frames, {p_off / 1000:.1f} m of braille, {len(texts)} lines -> {args.out}",
          file=sys.stderr)


if __name__ == "__main__":
    main()
