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


Listed = tuple[str, str, int, str, str]  # file, sent_id, token id, form, marked sentence


def verb_tokens(lemmas: set[str], ud_dir: Path = UD) -> dict[str, list[Listed]]:
    """Every VERB token of ``lemmas`` not attached as an auxiliary, in treebank order."""
    found: dict[str, list[Listed]] = {lemma: [] for lemma in lemmas}
    for name in FILES:
        with open(ud_dir / name, encoding="utf-8") as fh:
            for sentence in conllu.parse_incr(fh):
                for tok in sentence:
                    if not isinstance(tok["id"], int) or tok["lemma"] not in found:
                        continue
                    if tok["upos"] != "VERB" or tok["deprel"].startswith("aux"):
                        continue
                    words = [
                        f"[[{t['form']}]]" if t["id"] == tok["id"] else t["form"]
                        for t in sentence
                        if isinstance(t["id"], int)
                    ]
                    sent_id = sentence.metadata["sent_id"]
                    found[tok["lemma"]].append(
                        (name, sent_id, tok["id"], tok["form"], " ".join(words))
                    )
    return found


def sample(tokens: list[Listed]) -> list[Listed]:
    """All tokens of a rare verb, a fixed random sample of a frequent one, in treebank order."""
    if len(tokens) <= ALL_UP_TO:
        return tokens
    keep = set(random.Random(RANDOM_STATE).sample(range(len(tokens)), SAMPLE_SIZE))
    return [t for i, t in enumerate(tokens) if i in keep]


if __name__ == "__main__":
    listed = verb_tokens(set(sys.argv[1:]))
    for verb in sys.argv[1:]:
        for i, (name, sent_id, tok_id, form, text) in enumerate(sample(listed[verb])):
            print(f"{verb}\t{i}\t{name}\t{sent_id}\t{tok_id}\t{form}\t{text}")
