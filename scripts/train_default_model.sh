#!/usr/bin/env bash
# Train the default model models/default.json (hex24 sensor, English, unidirectional GRU)
# on simulated data. See docs/default-model.md. Takes about 12 minutes of training on 2 cores.
set -euo pipefail
cd "$(dirname "$0")/.."
DS=${DS:-/tmp/tactread-default-ds}
cargo build --release
BIN=target/release/tactread
"$BIN" simulate dataset --lines 1500 --lang en --preset typical --rate 100 --speed 15..25 \
    --seed 11 --jobs 2 --out "$DS" --force
"$BIN" train --data "$DS" --out models/default.json --hidden 64 --layers 2 --direction uni \
    --max-minutes 7 --seed 11 --threads 2 --force
# Continue the same run to 12 minutes of training in all (the shipped model).
"$BIN" train --data "$DS" --out models/default.json --hidden 64 --layers 2 --direction uni \
    --max-minutes 12 --seed 11 --threads 2 --resume
ls -l models/default.json
