#!/usr/bin/python3
"""SentencePiece models trained and run by the reference implementation (Debian python3-sentencepiece).

usage: sentencepiece_reference.py OUT_DIR CORPUS_TXT LINES_JSON
Trains eight small models on CORPUS_TXT — BPE and unigram, byte fallback on and off, remove_extra_whitespaces on and
off, all with the identity normalization rules and 400 pieces — as OUT_DIR/{name}.model, and prints JSON
{"ids": {name: [[ids of each line]]}, "pieces": {name: [piece strings of each line]}} for the lines of LINES_JSON.
"""
import json
import os
import sys

import sentencepiece as spm


def main():
    out, corpus, lines_path = sys.argv[1], sys.argv[2], sys.argv[3]
    with open(lines_path, encoding="utf-8") as f:
        lines = json.load(f)
    ids, pieces = {}, {}
    for kind in ("bpe", "unigram"):
        for byte_fallback in (True, False):
            for remove_extra in (True, False):
                name = f"{kind}-bytes{int(byte_fallback)}-extra{int(remove_extra)}"
                prefix = os.path.join(out, name)
                spm.SentencePieceTrainer.train(
                    input=corpus, model_prefix=prefix, vocab_size=400, model_type=kind, byte_fallback=byte_fallback,
                    character_coverage=0.9995, normalization_rule_name="identity", remove_extra_whitespaces=remove_extra,
                    minloglevel=2)
                sp = spm.SentencePieceProcessor(model_file=prefix + ".model")
                ids[name] = [sp.encode(line) for line in lines]
                pieces[name] = [sp.encode(line, out_type=str) for line in lines]
    print(json.dumps({"ids": ids, "pieces": pieces}))


if __name__ == "__main__":
    main()
