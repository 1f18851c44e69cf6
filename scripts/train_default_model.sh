#!/usr/bin/env bash
# Train the default model models/default.json (hex24 sensor, en/de/fr/es, unidirectional GRU)
# on simulated data. See docs/default-model.md. Took 9 minutes of training on 2 shared cores.
set -euo pipefail
cd "$(dirname "$0")/.."
DS=${DS:-/tmp/tactread-default-ds}
cargo build --release
BIN=target/release/tactread
"$BIN" simulate dataset --lines 1500 --preset typical --rate 100 --speed 15..25 \
    --seed 11 --jobs 2 --out "$DS" --force
# No --lang: the corpus lines are shared between en, de, fr and es, and one model learns all four.
"$BIN" train --data "$DS" --out models/default.json --hidden 64 --layers 2 --direction uni \
    --max-minutes 25 --seed 11 --threads 2 --force
ls -l models/default.json
