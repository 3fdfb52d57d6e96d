"""Matching induced senses to existing ones: the similarity of two senses and the one-to-one
assignment (Hungarian method) that ``lexbuild.editions.merge`` applies.

The similarity averages what is known of shared example sentences and centroid cosine (see
``lexbuild.editions.merge`` for the whole policy).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from lexbuild.errors import MergeError
from lexbuild.lexicon.model import Example

__all__ = [
    "MergeSettings",
    "combined_similarity",
    "cosine",
    "example_key",
    "match_senses",
    "sentence_of",
]

Vector = npt.NDArray[np.float32]
Sentence = tuple[str, str]  # (corpus, sentence id)


@dataclass(frozen=True)
class MergeSettings:
    min_similarity: float = 0.5  # below it an induced sense is not the same as an existing one
    example_weight: float = 0.5  # weight of shared examples vs centroid cosine, both known
    max_examples: int = 5  # example candidates are added while a sense has fewer than this
    split_min_examples: int = 1  # shared examples needed to report a split or merge branch

    def __post_init__(self) -> None:
        if not 0.0 <= self.example_weight <= 1.0:
            raise MergeError(f"example_weight must be in [0, 1], got {self.example_weight}")
        if self.max_examples < 0 or self.split_min_examples < 1:
            raise MergeError("max_examples must be >= 0 and split_min_examples >= 1")



def sentence_of(example: Example) -> Sentence | None:
    return (example.source.corpus, example.source.sentence) if example.source else None


def example_key(example: Example) -> tuple[str, str]:
    ref = sentence_of(example)
    return ref if ref is not None else ("", example.text)


def cosine(a: Vector | None, b: Vector | None) -> float | None:
    if a is None or b is None or a.shape != b.shape:
        return None
    norm = float(np.linalg.norm(a) * np.linalg.norm(b))
    return float(np.dot(a, b) / norm) if norm > 0 else None


def combined_similarity(
    shared: float | None, cosine: float | None, settings: MergeSettings
) -> float:
    if shared is not None and cosine is not None:
        w = settings.example_weight
        return w * shared + (1 - w) * cosine
    if shared is not None:
        return shared
    if cosine is not None:
        return cosine
    return 0.0


def match_senses(similarity: npt.NDArray[np.float64], minimum: float) -> list[tuple[int, int]]:
    """One-to-one pairs (row, column) maximising the total similarity, each >= ``minimum``.

    Pairs under the minimum are cut before the assignment (their similarity set to a value that
    no pair prefers), so that a weak pair never displaces a strong one elsewhere.
    """
    from scipy.optimize import linear_sum_assignment

    if similarity.size == 0:
        return []
    weights = np.where(similarity >= minimum, similarity, 0.0)
    rows, cols = linear_sum_assignment(weights, maximize=True)
    return sorted(
        (int(r), int(c)) for r, c in zip(rows, cols, strict=True) if similarity[r, c] >= minimum
    )
