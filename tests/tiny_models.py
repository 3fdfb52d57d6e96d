"""A tiny randomly initialised BERT with a WordPiece vocabulary of our own, saved to a folder.

It exercises the real loading code (``AutoModel``/``AutoTokenizer`` from a local folder) without
any download. Shared by the vector tests, the induce CLI tests and benchmarks/bench_vectors.py.
"""

from __future__ import annotations

import inspect
from pathlib import Path

import numpy as np

_VOCABULARY_TEXT = (
    "le la les un une des de du à au et il elle ils on nous vous je tu se en y que qui "
    "ne pas plus très dans sur pour par avec sans chat chien maison pomme livre lettre "
    "train ville enfant mère père ami table porte eau pain école travail jardin journal "
    "manger prendre donner porter voir aller venir faire dire lire écrire ouvrir fermer "
    "boire partir arriver mange prend donne porte voit va vient fait dit lit écrit ouvre"
)
WORDS = _VOCABULARY_TEXT.split()


def build_tiny_bert(
    folder: Path,
    *,
    layers: int = 4,
    hidden: int = 32,
    heads: int = 2,
    max_positions: int = 128,
) -> Path:
    """Write a random BERT (weights drawn like BERT's initialiser, reproducibly) to ``folder``."""
    import torch
    from transformers import BertConfig, BertModel, BertTokenizerFast

    folder.mkdir(parents=True, exist_ok=True)
    letters = list("abcdefghijklmnopqrstuvwxyzàâçéèêëîïôûùü'.,;:!?«»-")
    vocab = ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]", *letters]
    vocab += [f"##{c}" for c in letters] + WORDS
    vocab_file = folder / "vocab.txt"
    vocab_file.write_text("\n".join(dict.fromkeys(vocab)) + "\n", encoding="utf-8")
    # transformers 5 names the vocabulary argument ``vocab``; 4.x named it ``vocab_file``.
    name = "vocab" if "vocab" in inspect.signature(BertTokenizerFast.__init__).parameters else (
        "vocab_file"
    )
    tokenizer = BertTokenizerFast(
        **{name: str(vocab_file)}, do_lower_case=True, strip_accents=False
    )
    assert tokenizer.vocab_size > 100  # the vocabulary was really read
    config = BertConfig(
        vocab_size=tokenizer.vocab_size,
        hidden_size=hidden,
        num_hidden_layers=layers,
        num_attention_heads=heads,
        intermediate_size=2 * hidden,
        max_position_embeddings=max_positions,
    )
    model = BertModel(config)
    weights = np.random.default_rng(0)  # normal, sd 0.02: BERT's initialiser range
    with torch.no_grad():
        for parameter in model.parameters():
            values = weights.normal(0.0, 0.02, tuple(parameter.shape)).astype(np.float32)
            parameter.copy_(torch.from_numpy(values))
    model.save_pretrained(folder)
    tokenizer.save_pretrained(folder)
    return folder
