#!/usr/bin/env python3
"""Generate lexicons/<lang>/words.txt for the builtin languages of tactread.

Source: the word frequencies shipped in the `wordfreq` package on PyPI
(Robyn Speer, https://doi.org/10.5281/zenodo.7199437; code Apache-2.0, data
CC-BY-SA 4.0: see lexicons/WORDLISTS.md for the licence and attribution).

For each language this keeps the most frequent words (by wordfreq's "best"
list) that are written only with letters the language's grade 1 code table
covers, folds them to lower case, and writes one word per line followed by a
tab and a count: the word's frequency times 10^9, rounded (so counts are
integers proportional to wordfreq's estimate).

Usage:
    pip install wordfreq==3.1.1
    python3 scripts/make_wordlists.py [--top 40000] [--out lexicons]

The output is deterministic for a given wordfreq version. words.txt carries
no header, so any word list tool reads it; the wordfreq version used is
printed here and recorded in lexicons/WORDLISTS.md.
"""

import argparse
import importlib.metadata
import os
import sys
import tempfile

import wordfreq

# Letters each builtin code table writes (lower case). Kept in step with the
# language packs in src/braille; a Rust test checks that every word encodes.
BASE = set("abcdefghijklmnopqrstuvwxyz")
ALPHABETS = {
    "en": BASE,
    "de": BASE | set("äöüß"),
    "fr": BASE | set("éàèùâêîôûëïüœç"),
    "es": BASE | set("áéíóúñü"),
}

# One count unit is a frequency of 1e-9.
SCALE = 1e9


def words_for(lang, top):
    """The `top` most frequent encodable words of `lang` with their counts."""
    alphabet = ALPHABETS[lang]
    out = []
    seen = set()
    for word in wordfreq.iter_wordlist(lang, wordlist="best"):
        w = word.lower()
        if not w or w in seen or not all(ch in alphabet for ch in w):
            continue
        freq = wordfreq.word_frequency(w, lang, wordlist="best")
        count = int(round(freq * SCALE))
        if count <= 0:
            break
        seen.add(w)
        out.append((w, count))
        if len(out) >= top:
            break
    return out


def write_atomic(path, lines):
    folder = os.path.dirname(path)
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".words-", suffix=".tmp")
    with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as f:
        f.writelines(lines)
    os.replace(tmp, path)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--top", type=int, default=40000, help="words per language (default 40000)")
    ap.add_argument("--out", default="lexicons", help="output folder (default lexicons)")
    ap.add_argument("--lang", action="append", help="only these languages (default: all)")
    args = ap.parse_args()
    langs = args.lang or sorted(ALPHABETS)
    for lang in langs:
        if lang not in ALPHABETS:
            sys.exit(f"unknown language {lang!r}: choose from {sorted(ALPHABETS)}")
        words = words_for(lang, args.top)
        path = os.path.join(args.out, lang, "words.txt")
        write_atomic(path, [f"{w}\t{c}\n" for w, c in words])
        size = os.path.getsize(path)
        print(f"{lang}: {len(words)} words, {size} bytes -> {path} (wordfreq {importlib.metadata.version('wordfreq')})")


if __name__ == "__main__":
    main()
