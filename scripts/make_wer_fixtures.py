#!/usr/bin/env python3
"""Write tests/fixtures/jiwer_cases.json: character and word error rates of
worked examples, computed by the general-purpose `jiwer` library (PyPI).

tests/metrics.rs reads the file and checks tactread's own CER and WER
against it. Run from the repository root after `pip install jiwer`:

    python3 scripts/make_wer_fixtures.py

The texts are invented (labels on a pharmacy shelf, transit and lift
signage in a scenario of our own), in English, German, French and Spanish,
with the kinds of errors a tactile reader makes: dropped, doubled and
misread characters, split and merged words, an empty reading.

Definitions matched on purpose:
  * CER: characters as given (Unicode code points, spaces included, no
    stripping): jiwer's ReduceToListOfListOfChars alone, without the
    default Strip step.
  * WER: jiwer's default word transform (collapse runs of spaces, strip,
    split on spaces), which for texts with spaces as the only whitespace
    equals splitting on whitespace.
Both are corpus-level: total edits over total reference length.
"""

import json
import os
from importlib import metadata

import jiwer

CASES = [
    {
        "name": "one label, one misread letter",
        "references": ["take two tablets daily"],
        "hypotheses": ["take two tablots daily"],
    },
    {
        "name": "dropped and doubled letters",
        "references": ["platform 4 northbound"],
        "hypotheses": ["platfrm 44 northbound"],
    },
    {
        "name": "merged and split words",
        "references": ["lift to level two", "emergency exit"],
        "hypotheses": ["liftto level t wo", "emergency exit"],
    },
    {
        "name": "empty reading",
        "references": ["store below 25 C"],
        "hypotheses": [""],
    },
    {
        "name": "reading longer than the truth",
        "references": ["no"],
        "hypotheses": ["on on on"],
    },
    {
        "name": "accented letters and runs of spaces",
        "references": ["Tür schließen", "défense de fumer", "salida de emergencia"],
        "hypotheses": ["Tur  schliessen", "défense de  fumer", "salida de emergéncia"],
    },
    {
        "name": "several labels of a shelf",
        "references": [
            "cough syrup 100 ml",
            "keep out of reach of children",
            "shake well before use",
            "dose 5 ml every 6 hours",
        ],
        "hypotheses": [
            "cough syrup 10 ml",
            "keep out of reach of chidren",
            "shake wall before use",
            "dose 5 ml every 8 hours",
        ],
    },
    {
        "name": "transposed neighbours",
        "references": ["ab c", "exit"],
        "hypotheses": ["ba c", "exti"],
    },
]


def main():
    chars = jiwer.ReduceToListOfListOfChars()
    out_cases = []
    for case in CASES:
        c = jiwer.process_characters(
            case["references"],
            case["hypotheses"],
            reference_transform=chars,
            hypothesis_transform=chars,
        )
        w = jiwer.process_words(case["references"], case["hypotheses"])
        out_cases.append(
            {
                **case,
                "cer": c.cer,
                "char_hits": c.hits,
                "char_substitutions": c.substitutions,
                "char_deletions": c.deletions,
                "char_insertions": c.insertions,
                "wer": w.wer,
                "word_hits": w.hits,
                "word_substitutions": w.substitutions,
                "word_deletions": w.deletions,
                "word_insertions": w.insertions,
            }
        )
    doc = {
        "source": {
            "library": "jiwer",
            "version": metadata.version("jiwer"),
            "registry": "PyPI",
            "cer": "jiwer.process_characters with ReduceToListOfListOfChars (no Strip)",
            "wer": "jiwer.process_words with its default transform",
            "script": "scripts/make_wer_fixtures.py",
        },
        "cases": out_cases,
    }
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    path = os.path.join(root, "tests", "fixtures", "jiwer_cases.json")
    os.makedirs(os.path.dirname(path), exist_ok=True)
    tmp = path + ".tmp"
    with open(tmp, "w", encoding="utf-8") as f:
        json.dump(doc, f, ensure_ascii=False, indent=2)
        f.write("\n")
    os.replace(tmp, path)
    print(f"wrote {path}: {len(out_cases)} cases, jiwer {doc['source']['version']}")


if __name__ == "__main__":
    main()
