"""Tiny randomly initialised encoders of several model families, saved to folders.

They exercise the real loading code (``AutoModel``/``AutoTokenizer`` from a local folder) without
any download. ``build_tiny_bert`` has a hand-written WordPiece vocabulary; ``build_tiny_model``
trains a real tokenizer of the family's kind with the ``tokenizers`` library on the sentences it
is given (the tests pass UD French text) and saves it the way that family's checkpoints are
saved: WordPiece (BERT), SentencePiece-style Unigram with ``▁`` (CamemBERT, XLM-RoBERTa,
DeBERTa-v2), byte-level BPE with ``Ġ`` (RoBERTa, ModernBERT) and XLM-style BPE with ``</w>``
read by the Python tokenizer (FlauBERT: vocab.json + merges.txt, no tokenizer.json). Each
model carries a masked-LM head (the substitutes representation needs one; ``AutoModel`` reads
the encoder and leaves the head aside). Shared by the vector tests, the induce CLI tests and
benchmarks/bench_vectors.py.
"""

from __future__ import annotations

import inspect
import json
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

_VOCABULARY_TEXT = (
    "le la les un une des de du à au et il elle ils on nous vous je tu se en y que qui "
    "ne pas plus très dans sur pour par avec sans chat chien maison pomme livre lettre "
    "train ville enfant mère père ami table porte eau pain école travail jardin journal "
    "manger prendre donner porter voir aller venir faire dire lire écrire ouvrir fermer "
    "boire partir arriver mange prend donne porte voit va vient fait dit lit écrit ouvre"
)
WORDS = _VOCABULARY_TEXT.split()

#: Families ``build_tiny_model`` builds (model_type of transformers).
FAMILIES = ("bert", "camembert", "xlm-roberta", "flaubert", "roberta", "deberta-v2", "modernbert")


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
    _randomise(model, torch)
    model.save_pretrained(folder)
    tokenizer.save_pretrained(folder)
    return folder


def _randomise(model: Any, torch: Any) -> None:
    """Weights drawn reproducibly whatever torch's own generator does: normal, sd 0.02."""
    weights = np.random.default_rng(0)  # BERT's initialiser range
    with torch.no_grad():
        for parameter in model.parameters():
            values = weights.normal(0.0, 0.02, tuple(parameter.shape)).astype(np.float32)
            parameter.copy_(torch.from_numpy(values))


def ud_texts(conllu: Path, limit: int = 300) -> list[str]:
    """The ``# text = `` lines of the first ``limit`` sentences of a CoNLL-U file."""
    texts: list[str] = []
    with open(conllu, encoding="utf-8") as handle:
        for line in handle:
            if line.startswith("# text = "):
                texts.append(line[len("# text = ") :].rstrip("\n"))
                if len(texts) == limit:
                    break
    return texts


# ------------------------------------------------------------------------------ tokenizers


def _unigram(texts: Sequence[str], specials: list[str], vocab_size: int) -> list[tuple[str, float]]:
    """A SentencePiece-style Unigram vocabulary (pieces and log-probabilities)."""
    from tokenizers import Tokenizer, models, pre_tokenizers, trainers

    tok = Tokenizer(models.Unigram())
    tok.pre_tokenizer = pre_tokenizers.Metaspace(replacement="▁", prepend_scheme="always")
    trainer = trainers.UnigramTrainer(
        vocab_size=vocab_size, special_tokens=specials, unk_token="<unk>" if "<unk>" in specials
        else "[UNK]", shrinking_factor=0.75, max_piece_length=8,
    )
    tok.train_from_iterator(texts, trainer)
    vocab: list[tuple[str, float]] = json.loads(tok.to_str())["model"]["vocab"]
    return [(str(piece), float(score)) for piece, score in vocab]


def _bpe(
    texts: Sequence[str],
    specials: list[str],
    vocab_size: int,
    *,
    byte_level: bool,
    end_of_word_suffix: str | None = None,
) -> tuple[dict[str, int], list[str]]:
    """A BPE vocabulary and merges: byte-level (``Ġ``) or XLM-style (``</w>``)."""
    from tokenizers import Tokenizer, models, pre_tokenizers, trainers

    options: dict[str, Any] = {}
    if end_of_word_suffix:
        options["end_of_word_suffix"] = end_of_word_suffix
    tok = Tokenizer(models.BPE(unk_token=None if byte_level else "<unk>", **options))
    if byte_level:
        tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
        alphabet = pre_tokenizers.ByteLevel.alphabet()
    else:
        tok.pre_tokenizer = pre_tokenizers.WhitespaceSplit()
        alphabet = []
    trainer = trainers.BpeTrainer(
        vocab_size=vocab_size, special_tokens=specials, initial_alphabet=alphabet,
        show_progress=False, **options,
    )
    tok.train_from_iterator(texts, trainer)
    model = json.loads(tok.to_str())["model"]
    merges = [m if isinstance(m, str) else " ".join(m) for m in model["merges"]]
    return dict(model["vocab"]), merges


def _wordpiece(texts: Sequence[str], vocab_size: int) -> dict[str, int]:
    from tokenizers import Tokenizer, models, normalizers, pre_tokenizers, trainers

    tok = Tokenizer(models.WordPiece(unk_token="[UNK]"))
    tok.normalizer = normalizers.BertNormalizer(lowercase=True, strip_accents=False)
    tok.pre_tokenizer = pre_tokenizers.BertPreTokenizer()
    trainer = trainers.WordPieceTrainer(
        vocab_size=vocab_size, special_tokens=["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"],
        show_progress=False,
    )
    tok.train_from_iterator(texts, trainer)
    return dict(json.loads(tok.to_str())["model"]["vocab"])


def _tokenizer(family: str, texts: Sequence[str], folder: Path, vocab_size: int) -> Any:
    """Train and save the family's tokenizer into ``folder``; return it (as transformers has it)."""
    import transformers as tf

    if family == "bert":
        tokenizer = tf.BertTokenizer(
            vocab=_wordpiece(texts, vocab_size), do_lower_case=True, strip_accents=False
        )
    elif family in ("camembert", "xlm-roberta"):
        specials = ["<s>", "<pad>", "</s>", "<unk>", "<mask>"]
        vocab = _unigram(texts, specials, vocab_size)
        cls = tf.CamembertTokenizer if family == "camembert" else tf.XLMRobertaTokenizer
        tokenizer = cls(vocab=vocab)
    elif family == "deberta-v2":
        specials = ["[PAD]", "[CLS]", "[SEP]", "[UNK]", "[MASK]"]
        tokenizer = tf.DebertaV2Tokenizer(vocab=_unigram(texts, specials, vocab_size))
    elif family == "roberta":
        specials = ["<s>", "<pad>", "</s>", "<unk>", "<mask>"]
        vocab, merges = _bpe(texts, specials, vocab_size, byte_level=True)
        tokenizer = tf.RobertaTokenizer(vocab=vocab, merges=[tuple(m.split(" ")) for m in merges])
    elif family == "modernbert":
        from tokenizers import Tokenizer, decoders, models, pre_tokenizers, processors

        specials = ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"]
        vocab, merges = _bpe(texts, specials, vocab_size, byte_level=True)
        backend = Tokenizer(models.BPE(vocab=vocab, merges=[tuple(m.split(" ")) for m in merges]))
        backend.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=False)
        backend.decoder = decoders.ByteLevel()
        backend.post_processor = processors.TemplateProcessing(
            single="[CLS] $A [SEP]", special_tokens=[("[CLS]", vocab["[CLS]"]),
                                                     ("[SEP]", vocab["[SEP]"])],
        )
        tokenizer = tf.PreTrainedTokenizerFast(
            tokenizer_object=backend, cls_token="[CLS]", sep_token="[SEP]", pad_token="[PAD]",
            mask_token="[MASK]", unk_token="[UNK]",
        )
    elif family == "flaubert":
        # FlauBERT's own layout: special tokens first, mask = <special1> at index 5.
        specials = ["<s>", "</s>", "<pad>", "<unk>", *(f"<special{i}>" for i in range(10))]
        vocab, merges = _bpe(texts, specials, vocab_size, byte_level=False,
                             end_of_word_suffix="</w>")
        folder.mkdir(parents=True, exist_ok=True)
        (folder / "vocab.json").write_text(json.dumps(vocab, ensure_ascii=False), "utf-8")
        (folder / "merges.txt").write_text("".join(m + "\n" for m in merges), "utf-8")
        tokenizer = tf.FlaubertTokenizer(str(folder / "vocab.json"), str(folder / "merges.txt"))
    else:
        raise ValueError(f"unknown family {family!r}; known: {', '.join(FAMILIES)}")
    tokenizer.save_pretrained(folder)
    return tokenizer


# ---------------------------------------------------------------------------------- models


def _config(family: str, tokenizer: Any, hidden: int, layers: int, positions: int) -> Any:
    import transformers as tf

    vocab_size = len(tokenizer)
    common: dict[str, Any] = {
        "vocab_size": vocab_size,
        "hidden_size": hidden,
        "num_hidden_layers": layers,
        "num_attention_heads": 2,
        "intermediate_size": 2 * hidden,
        "pad_token_id": tokenizer.pad_token_id,
    }
    if family == "bert":
        return tf.BertConfig(max_position_embeddings=positions, **common)
    if family in ("camembert", "xlm-roberta", "roberta"):
        cls = {"camembert": tf.CamembertConfig, "xlm-roberta": tf.XLMRobertaConfig,
               "roberta": tf.RobertaConfig}[family]
        # Positions offset by the padding index, as in the published checkpoints.
        return cls(max_position_embeddings=positions + 2, bos_token_id=tokenizer.bos_token_id,
                   eos_token_id=tokenizer.eos_token_id, **common)
    if family == "deberta-v2":
        return tf.DebertaV2Config(max_position_embeddings=positions, relative_attention=True,
                                  position_buckets=32, pos_att_type=["p2c", "c2p"], **common)
    if family == "modernbert":
        return tf.ModernBertConfig(
            max_position_embeddings=positions, global_attn_every_n_layers=2, local_attention=16,
            cls_token_id=tokenizer.cls_token_id, sep_token_id=tokenizer.sep_token_id,
            bos_token_id=tokenizer.cls_token_id, eos_token_id=tokenizer.sep_token_id, **common,
        )
    if family == "flaubert":
        return tf.FlaubertConfig(
            vocab_size=vocab_size, emb_dim=hidden, n_layers=layers, n_heads=2,
            max_position_embeddings=positions, pad_index=tokenizer.pad_token_id,
            unk_index=tokenizer.unk_token_id, mask_index=tokenizer.mask_token_id,
            bos_index=tokenizer.bos_token_id, eos_index=tokenizer.sep_token_id,
        )
    raise ValueError(f"unknown family {family!r}")


def build_tiny_model(
    family: str,
    folder: Path,
    texts: Iterable[str],
    *,
    vocab_size: int = 400,
    hidden: int = 32,
    layers: int = 2,
    max_positions: int = 128,
) -> Path:
    """A random masked LM of ``family`` with a tokenizer trained on ``texts``, in ``folder``."""
    import torch
    from transformers import AutoModelForMaskedLM

    texts = list(texts)
    folder.mkdir(parents=True, exist_ok=True)
    tokenizer = _tokenizer(family, texts, folder, vocab_size)
    config = _config(family, tokenizer, hidden, layers, max_positions)
    model = AutoModelForMaskedLM.from_config(config)
    _randomise(model, torch)
    model.save_pretrained(folder)
    return folder


_SESSION_MODELS: dict[str, Path] = {}


def session_tiny_model(family: str, base: Path, ud_dir: Path) -> Path:
    """``build_tiny_model`` once per process for tests (tokenizer trained on the first 300
    sentences of UD French-Sequoia dev); ``base`` is a session temporary folder."""
    if family not in _SESSION_MODELS:
        texts = ud_texts(ud_dir / "fr_sequoia-ud-dev.conllu", 300)
        _SESSION_MODELS[family] = build_tiny_model(family, base / "tiny-models" / family, texts)
    return _SESSION_MODELS[family]
