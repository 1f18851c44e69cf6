#!/usr/bin/env python3
"""Run tactread's network benchmark and the PyTorch peer back to back, in rounds, and print the
ratios the training issue asks for (ratio of medians, and each round's ratio).

    python3 scripts/net_vs_peer.py                 # 3 rounds, 1 thread
    python3 scripts/net_vs_peer.py --rounds 5

Needs the peer's venv (`../shared/peers/setup_venv.sh` once; it lives in
~/.cache/tactread-peers/venv, or set PEER_PYTHON) and a Rust toolchain. Only standard-library
Python. The machine should be otherwise idle: the ratios are only as fair as the two programs'
share of it, so the load average is printed with every round.
"""
import argparse
import json
import os
import re
import statistics
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PEER = ROOT.parent / "shared" / "peers" / "torch_gru_bench.py"
PY = os.environ.get("PEER_PYTHON", str(Path.home() / ".cache/tactread-peers/venv/bin/python"))


def load():
    try:
        return " ".join(Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return "?"


def ours():
    out = subprocess.run(["cargo", "bench", "--bench", "net"], cwd=ROOT, check=True,
                         capture_output=True, text=True).stdout
    fig = {}
    for line in out.splitlines():
        m = re.match(r"train_(uni|bi)_\S+_threads1: .*?([\d.]+) frames/s", line)
        if m:
            fig[f"train_{m.group(1)}"] = float(m.group(2))
        m = re.match(r"infer_\S+: ([\d.]+) frames/s", line)
        if m:
            fig["infer"] = float(m.group(1))
        m = re.match(r"step_\S+: median ([\d.]+) us, p99 ([\d.]+) us", line)
        if m:
            fig["step_median_us"], fig["step_p99_us"] = float(m.group(1)), float(m.group(2))
    missing = {"train_uni", "train_bi", "infer", "step_p99_us"} - fig.keys()
    if missing:
        sys.exit(f"could not read {sorted(missing)} from `cargo bench --bench net`:\n{out}")
    return fig


def peer():
    out = subprocess.run([PY, str(PEER), "--threads", "1", "--train-steps", "5", "--warmup", "1",
                          "--infer-repeats", "2", "--frame-by-frame-frames", "3000"],
                         check=True, capture_output=True, text=True).stdout
    doc = json.loads(out.strip().splitlines()[-1])
    r = doc["results"]["threads_1"]
    return {"train_uni": r["train"]["train_frames_per_s"],
            "train_bi": r["train_bidir"]["train_frames_per_s"],
            "infer": r["infer"]["full"]["frames_per_s"],
            "frame_by_frame_us": r["infer"]["frame_by_frame"]["us_per_frame"]}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3)
    args = ap.parse_args()
    if not Path(PY).exists():
        sys.exit(f"no peer Python at {PY}: run ../shared/peers/setup_venv.sh first, or set PEER_PYTHON")
    rounds = []
    for i in range(args.rounds):
        a = ours()
        l1 = load()
        b = peer()
        print(f"round {i + 1} (load {l1} / {load()}): ours {a}; peer {b}", flush=True)
        rounds.append((a, b))
    med = lambda xs: statistics.median(xs)
    rows = [("training, unidirectional, 1 thread (frames/s)", "train_uni", "train_uni", 1.0, 2.0),
            ("training, bidirectional, 1 thread (frames/s)", "train_bi", "train_bi", 1.0, 2.0),
            ("inference, batch 1, 100,000 frames (frames/s)", "infer", "infer", 5.0, 10.0)]
    print("\n| figure | ours (median) | peer (median) | ratio of medians | per round | goal / target |")
    print("| --- | --- | --- | --- | --- | --- |")
    for label, ka, kb, goal, target in rows:
        a = med([r[0][ka] for r in rounds])
        b = med([r[1][kb] for r in rounds])
        per = ", ".join(f"{r[0][ka] / r[1][kb]:.2f}" for r in rounds)
        print(f"| {label} | {a:,.0f} | {b:,.0f} | {a / b:.2f}x | {per} | {goal:g}x / {target:g}x |")
    p99 = med([r[0]["step_p99_us"] for r in rounds])
    fbf = med([r[1]["frame_by_frame_us"] for r in rounds])
    print(f"| frame by frame: our `Network::step` p99 vs the peer's per-frame time (us) | {p99:.2f} | "
          f"{fbf:.1f} | {fbf / p99:.1f}x lower | "
          + ", ".join(f"{r[1]['frame_by_frame_us'] / r[0]['step_p99_us']:.1f}" for r in rounds)
          + " | 10x lower |")


if __name__ == "__main__":
    main()
