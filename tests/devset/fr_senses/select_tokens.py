"""List the tokens of the development set's verbs, in treebank order, sampled where frequent.

Run from the project root: ``python tests/devset/fr_senses/select_tokens.py VERB...``.
Prints one line per selected token (file, sent_id, token id, form, then the sentence with the
verb between [[ ]]), the listing the annotator read. The selection is deterministic: a verb
with at most ``ALL_UP_TO`` tokens keeps them all, a more frequent one keeps ``SAMPLE_SIZE``
tokens drawn by ``random.Random(RANDOM_STATE).sample`` over its tokens in treebank order.
"""

from __future__ import annotations

import random
import sys
from pathlib import Path

import conllu

UD = Path(__file__).resolve().parents[3].parent / "shared" / "corpora" / "ud"
FILES = (
    "fr_sequoia-ud-train.conllu",
    "fr_sequoia-ud-dev.conllu",
    "fr_sequoia-ud-test.conllu",
    "fr_gsd-ud-dev.conllu",
    "fr_gsd-ud-test.conllu",
)
ALL_UP_TO = 60
SAMPLE_SIZE = 50
RANDOM_STATE = 10


def verb_tokens(lemma: str) -> list[tuple[str, str, int, str, str]]:
    """Every VERB token of ``lemma`` that is not attached as an auxiliary, in treebank order."""
    found = []
    for name in FILES:
        with open(UD / name, encoding="utf-8") as fh:
            for sentence in conllu.parse_incr(fh):
                for tok in sentence:
                    if not isinstance(tok["id"], int):
                        continue
                    if tok["lemma"] != lemma or tok["upos"] != "VERB":
                        continue
                    if tok["deprel"].startswith("aux"):
                        continue
                    words = [
                        f"[[{t['form']}]]" if t["id"] == tok["id"] else t["form"]
                        for t in sentence
                        if isinstance(t["id"], int)
                    ]
                    found.append(
                        (name, sentence.metadata["sent_id"], tok["id"], tok["form"], " ".join(words))
                    )
    return found


def select(lemma: str) -> list[tuple[str, str, int, str, str]]:
    tokens = verb_tokens(lemma)
    if len(tokens) <= ALL_UP_TO:
        return tokens
    keep = set(random.Random(RANDOM_STATE).sample(range(len(tokens)), SAMPLE_SIZE))
    return [t for i, t in enumerate(tokens) if i in keep]


if __name__ == "__main__":
    for verb in sys.argv[1:]:
        for i, (name, sent_id, tok_id, form, text) in enumerate(select(verb)):
            print(f"{verb}\t{i}\t{name}\t{sent_id}\t{tok_id}\t{form}\t{text}")
