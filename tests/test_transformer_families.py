"""The transformer encoder on every model family a lexicographer brings, pooled right.

Each family's tiny random model has a real tokenizer trained with the ``tokenizers`` library on
the first 300 sentences of UD French-Sequoia dev (tests/tiny_models.py), saved as a local
folder and loaded through the encoder's own code. References outside lexbuild:
* the tokenizer's own decoder (``convert_tokens_to_string``) turns the pooled pieces back into
  text, which must be the verb's form;
* the tokenizer's own encoding of the sentence as running text (words joined by spaces) must
  be what the model is fed: pre-split words get the pieces they get after a space;
* conventions of each family as documented by transformers: RoBERTa-style byte-level BPE
  needs ``add_prefix_space=True`` for pre-split input (RobertaTokenizer's docstring);
  SentencePiece marks a word start with ``▁``; XLM-style BPE ends a word with ``</w>``;
  WordPiece continues a word with ``##``.
"""

from __future__ import annotations

import unicodedata
from pathlib import Path

import numpy as np
import pytest

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.errors import PieceAlignmentError
from lexbuild.senses.transformer import PieceAligner, TransformerEncoder
from tests.tiny_models import FAMILIES, session_tiny_model

torch = pytest.importorskip("torch")
transformers = pytest.importorskip("transformers")

SENTENCES = 300
#: Piece conventions each family's tokenizer must be recognised as.
CONVENTIONS = {
    "bert": "wordpiece",
    "camembert": "sentencepiece",
    "xlm-roberta": "sentencepiece",
    "deberta-v2": "sentencepiece",
    "roberta": "byte-level",
    "modernbert": "byte-level",
    "flaubert": "per-word",
}


@pytest.fixture(scope="session")
def family_folders(tmp_path_factory: pytest.TempPathFactory, ud_dir: Path) -> dict[str, Path]:
    """One tiny model per family, built once per test session."""
    base = tmp_path_factory.getbasetemp()
    return {family: session_tiny_model(family, base, ud_dir) for family in FAMILIES}


@pytest.fixture(scope="module")
def occurrences(ud_dir: Path) -> list[Occurrence]:
    """Verb occurrences of the sentences the tokenizers were trained on."""
    occs = list(iter_occurrences(ud_dir / "fr_sequoia-ud-dev.conllu"))
    keep = set(list(dict.fromkeys(o.sentence_id for o in occs))[:SENTENCES])
    return [o for o in occs if o.sentence_id in keep]


def _fold(text: str) -> str:
    # WordPiece's decoder puts spaces around punctuation ("contre - indiqué"): spaces ignored.
    return "".join(unicodedata.normalize("NFC", text).split()).casefold()


@pytest.mark.parametrize("family", FAMILIES)
def test_pooled_pieces_are_the_verbs_own(
    family: str, family_folders: dict[str, Path], occurrences: list[Occurrence]
) -> None:
    encoder = TransformerEncoder(family_folders[family])
    tok = encoder._tokenizer
    assert encoder.settings["pieces"] == CONVENTIONS[family]
    pooled = encoder.verb_pieces(occurrences)
    every = encoder.verb_pieces(occurrences, all_pieces=True)
    special = set(tok.all_special_tokens)
    lone_markers = 0
    for occ, mine, fed in zip(occurrences, pooled, every, strict=True):
        verb = occ.words[occ.token]
        # The tokenizer's own decoder gives back the verb's form from the pooled pieces.
        assert _fold(tok.convert_tokens_to_string(mine)) == _fold(verb), (family, verb, mine)
        assert not special & set(mine), (family, verb, mine)
        assert all(tok.convert_tokens_to_string([p]).strip() for p in mine), (verb, mine)
        lone_markers += len(fed) - len(mine)
        if CONVENTIONS[family] == "sentencepiece":
            assert fed[0].startswith("▁"), (verb, fed)
        elif CONVENTIONS[family] == "byte-level":
            # Fed after a space: the first piece starts with Ġ (RobertaTokenizer's advice).
            assert fed[0].startswith("Ġ"), (verb, fed)
        elif family == "flaubert":
            assert fed[-1].endswith("</w>"), (verb, fed)
        else:
            assert not fed[0].startswith("##"), (verb, fed)
    if family in ("camembert", "xlm-roberta", "deberta-v2"):
        # The case the pooling exists for: some verbs start with a lone ▁ piece, not pooled.
        assert lone_markers > 0
    X = encoder.encode(occurrences[:40])
    assert X.shape == (40, encoder.dimension) and np.isfinite(X).all()
    np.testing.assert_allclose(np.linalg.norm(X, axis=1), 1.0, atol=1e-5)


@pytest.mark.parametrize("family", FAMILIES)
def test_model_is_fed_what_running_text_gives(
    family: str, family_folders: dict[str, Path], occurrences: list[Occurrence]
) -> None:
    encoder = TransformerEncoder(family_folders[family])
    reference = transformers.AutoTokenizer.from_pretrained(
        family_folders[family], local_files_only=True
    )
    aligner = encoder._aligner
    seen = set()
    compared = 0
    for occ in occurrences[:150]:
        if occ.sentence_id in seen:
            continue
        seen.add(occ.sentence_id)
        ids, _pooled, _own = encoder._prepare([occ])[0]
        inner = ids[len(aligner.prefix) : len(ids) - len(aligner.suffix)]
        if family == "flaubert":
            # Moses (inside FlauBERT's tokenizer) splits "L' association" into L + ' but keeps
            # "L'" whole in raw text "L'association": each word alone is the faithful input.
            expected = reference.convert_tokens_to_ids(
                [p for word in occ.words for p in reference.tokenize(word)]
            )
        else:
            # A leading space: the first word too is treated as following a space.
            running = " " + " ".join(occ.words)
            expected = reference(running, add_special_tokens=False)["input_ids"]
        if len(expected) + len(aligner.prefix) + len(aligner.suffix) > encoder.max_length:
            continue  # windowed around the verb (tested in test_vectors.py)
        compared += 1
        if CONVENTIONS[family] in ("wordpiece", "per-word"):
            assert inner == list(expected), occ.text
        else:
            assert reference.convert_ids_to_tokens(inner) == reference.convert_ids_to_tokens(
                expected
            ), occ.text
    assert compared >= 30


def test_batched_vectors_match_one_sentence_at_a_time(
    family_folders: dict[str, Path], occurrences: list[Occurrence]
) -> None:
    # Padding and length sorting must not change a vector (SentencePiece family, offsets).
    encoder = TransformerEncoder(family_folders["camembert"], batch_size=7)
    sample = occurrences[:20]
    together = encoder.encode(sample)
    alone = np.stack([encoder.encode([occ])[0] for occ in sample])
    np.testing.assert_allclose(together, alone, atol=2e-5)


def test_a_tokenizer_that_cannot_map_pieces_back_is_refused() -> None:
    # A BPE whose pre-tokenizer keeps the space inside the next word (no byte-level or
    # SentencePiece marker to switch on): a word alone and after a space get different pieces.
    from tokenizers import Tokenizer, models, pre_tokenizers, trainers
    from transformers import PreTrainedTokenizerFast

    backend = Tokenizer(models.BPE(unk_token="<unk>"))
    backend.pre_tokenizer = pre_tokenizers.Split(" ", behavior="merged_with_next")
    texts = ["le pêcheur répare ses huîtres à Brévenn aujourd'hui", "l' ami mange ."] * 20
    backend.train_from_iterator(texts, trainers.BpeTrainer(vocab_size=120,
                                                           special_tokens=["<unk>", "<pad>"]))
    tok = PreTrainedTokenizerFast(tokenizer_object=backend, unk_token="<unk>", pad_token="<pad>")
    with pytest.raises(PieceAlignmentError, match="cannot be mapped back to words"):
        PieceAligner(tok, "brevenn-model")


def test_cli_refuses_such_a_tokenizer_with_exit_2(
    tmp_path: Path, family_folders: dict[str, Path], ud_dir: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    import shutil

    from tokenizers import Tokenizer, models, pre_tokenizers, trainers
    from transformers import PreTrainedTokenizerFast

    from lexbuild.cli import main

    folder = tmp_path / "odd-model"
    shutil.copytree(family_folders["bert"], folder)
    for name in ("tokenizer.json", "tokenizer_config.json", "vocab.txt"):
        (folder / name).unlink(missing_ok=True)
    backend = Tokenizer(models.BPE(unk_token="[UNK]"))
    backend.pre_tokenizer = pre_tokenizers.Split(" ", behavior="merged_with_next")
    backend.train_from_iterator(["le pêcheur répare ses huîtres"] * 10, trainers.BpeTrainer(
        vocab_size=60, special_tokens=["[UNK]", "[PAD]", "[CLS]", "[SEP]", "[MASK]"]))
    PreTrainedTokenizerFast(tokenizer_object=backend, unk_token="[UNK]", pad_token="[PAD]",
                            cls_token="[CLS]", sep_token="[SEP]").save_pretrained(folder)
    code = main(["induce", str(ud_dir / "fr_sequoia-ud-dev.conllu"), "--output",
                 str(tmp_path / "out"), "--representation", "transformer", "--model",
                 str(folder), "--threshold", "0.5", "--no-cache"])
    assert code == 2
    assert "cannot be mapped back to words" in capsys.readouterr().err
