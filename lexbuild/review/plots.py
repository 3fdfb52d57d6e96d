"""The site's two plots as deterministic SVG (matplotlib, imported here only).

Same inputs, same bytes: a fixed ``svg.hashsalt`` (the ids matplotlib gives clip paths), no date
in the metadata, text drawn as paths (no font file to fetch), and a projection whose only
randomness is a fixed ``random_state``.
"""

from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.errors import LexbuildError

__all__ = ["MAX_POINTS", "calibration_svg", "project_2d", "projection_svg"]

#: Points drawn per verb at most (a fixed-state sample beyond): a page stays light.
MAX_POINTS = 1500
_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*", "<", ">")
# A palette of our own, readable in grey when printed (alternating light and dark).
_COLOURS = ("#1e6b5c", "#d08a3c", "#2f4b7c", "#c2b280", "#8c2d19", "#7fa99f", "#4a4a4a",
            "#b5651d", "#5d8aa8", "#9a7d5a")
_METRICS = (("ari", "ARI"), ("bcubed_f1", "B-cubed F1"), ("paired_f1", "paired F1"),
            ("v_measure", "V-measure"))


def _svg(figure: Any) -> bytes:
    import matplotlib

    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": "lexbuild-review", "svg.fonttype": "path"}):
        figure.savefig(buffer, format="svg", metadata={"Date": None, "Creator": "lexbuild"})
    return buffer.getvalue()


def _figure(width: float, height: float) -> Any:
    try:
        import matplotlib
    except ImportError:
        raise LexbuildError("the induction diagnostics plots need matplotlib: "
                            "pip install 'lexbuild[plot]'") from None

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), dpi=100)


def project_2d(
    vectors: Mapping[str, npt.NDArray[np.float32]], *, random_state: int = 0,
    max_points: int = MAX_POINTS,
) -> tuple[npt.NDArray[np.float64], list[str]]:
    """Points (n, 2) on the first two principal components and the sense of each point.

    Senses are taken in sorted order; beyond ``max_points`` a sample drawn with
    ``random_state`` is kept. scikit-learn's PCA fixes the sign of each component, so the
    picture does not flip between runs.
    """
    from sklearn.decomposition import PCA

    keys = sorted(key for key in vectors if len(vectors[key]))
    if not keys:
        return np.zeros((0, 2)), []
    matrix = np.vstack([np.asarray(vectors[key], dtype=np.float64) for key in keys])
    labels = [key for key in keys for _ in range(len(vectors[key]))]
    if len(labels) > max_points:
        keep = np.sort(np.random.RandomState(random_state).choice(
            len(labels), max_points, replace=False))
        matrix = matrix[keep]
        labels = [labels[i] for i in keep]
    if len(labels) < 2 or matrix.shape[1] < 2:
        points = np.zeros((len(labels), 2))
        points[:, : min(2, matrix.shape[1])] = matrix[:, :2]
        return points, labels
    pca = PCA(n_components=2, svd_solver="full", random_state=random_state)
    return pca.fit_transform(matrix), labels


def projection_svg(
    lemma: str, vectors: Mapping[str, npt.NDArray[np.float32]], *, random_state: int = 0
) -> bytes:
    """Scatter plot of a verb's occurrence vectors, one colour and marker per sense."""
    points, labels = project_2d(vectors, random_state=random_state)
    figure = _figure(6.4, 4.6)
    axes = figure.add_subplot(1, 1, 1)
    for n, key in enumerate(sorted(set(labels))):
        mask = np.array([label == key for label in labels])
        axes.scatter(points[mask, 0], points[mask, 1], s=16, alpha=0.75,
                     marker=_MARKERS[n % len(_MARKERS)], color=_COLOURS[n % len(_COLOURS)],
                     label=f"{key} ({int(mask.sum())})", linewidths=0.4, edgecolors="#1f2a30")
    axes.set_title(lemma)
    axes.set_xlabel("PC 1")
    axes.set_ylabel("PC 2")
    axes.legend(fontsize=8, loc="best", frameon=False)
    axes.spines[["top", "right"]].set_visible(False)
    figure.tight_layout()
    return _svg(figure)


def calibration_svg(
    rows: Sequence[Mapping[str, Any]], chosen: float, labels: Mapping[str, str]
) -> bytes:
    """The threshold sweep: mean scores per threshold, the chosen threshold marked."""
    xs = [float(row["threshold"]) for row in rows]
    figure = _figure(6.8, 4.2)
    axes = figure.add_subplot(1, 1, 1)
    for n, (name, title) in enumerate(_METRICS):
        if all(name in row for row in rows):
            axes.plot(xs, [float(row[name]) for row in rows], marker=_MARKERS[n], markersize=4,
                      color=_COLOURS[n], linewidth=1.2, label=title)
    axes.axvline(chosen, color="#8c2d19", linestyle="--", linewidth=1.2,
                 label=f"{labels['chosen']} {chosen:g}")
    axes.set_xlabel(labels["threshold"])
    axes.set_ylabel(labels["score"])
    axes.set_ylim(-0.05, 1.05)
    axes.legend(fontsize=8, loc="best", frameon=False)
    axes.spines[["top", "right"]].set_visible(False)
    figure.tight_layout()
    return _svg(figure)
