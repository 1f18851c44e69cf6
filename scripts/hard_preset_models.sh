#!/usr/bin/env bash
# Reproduce the hard-preset word-error figures of docs/benchmarks.md ("The same goal with
# bidirectional models and word-boundary repairs"): a bidirectional 2 x 128 model trained on the
# typical preset, fine-tuned on hard data in three steps, then the lexicon tuned and the test
# split evaluated with and without the lexicon. About 35 minutes of training on 2 idle cores and
# 16 GB of disk for the datasets (set WORK to put them elsewhere).
set -euo pipefail
cd "$(dirname "$0")/.."
WORK=${WORK:-/tmp/tactread-hard}
mkdir -p "$WORK"
cargo build --release
BIN=$PWD/target/release/tactread
cd "$WORK"
"$BIN" simulate dataset --lines 2000 --preset typical --lang en --frames npy --seed 7 --out typical2000 --force
"$BIN" simulate dataset --lines 2000 --preset hard --lang en --frames npy --seed 7 --out hard2000 --force
"$BIN" simulate dataset --lines 4000 --preset hard --lang en --frames npy --seed 8 --out hard4000 --force
"$BIN" train --data typical2000 --out typbi.model.json --direction bi --epochs 30 \
    --max-minutes 20 --threads 2 --seed 1 --force
"$BIN" train --init typbi.model.json --refit-prep --data hard2000 --out hardbi.model.json \
    --epochs 40 --lr 5e-4 --patience 10 --max-minutes 50 --threads 2 --seed 1 --force
"$BIN" train --init hardbi.model.json --data hard4000 --out hardbi2.model.json \
    --epochs 30 --lr 3e-4 --patience 8 --max-minutes 40 --threads 2 --seed 2 --force
"$BIN" train --init hardbi2.model.json --data hard4000 --out hardbi3.model.json \
    --epochs 30 --lr 2e-4 --patience 8 --max-minutes 30 --threads 2 --seed 3 --force
"$BIN" lexicon tune hardbi3.model.json hard4000/validation/*.json --out tuned.json --force
"$BIN" evaluate hardbi3.model.json hard4000 --json hardbi3.json --force
"$BIN" evaluate hardbi3.model.json hard4000 --weights tuned.json --json hardbi3-tuned.json --force
