"""The words of the review site, in the languages the project has them (French, English).

``labels_for(language)`` picks by the primary subtag of the dictionary's BCP 47 ``language``
(``fr-CA`` -> French); any other language gets English.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Mapping

__all__ = ["LANGUAGES", "labels_for"]

_EN: dict[str, str] = {
    "site": "Review site",
    "colon": ": ",
    "index": "Entries",
    "changes": "Changes in this edition",
    "diagnostics": "Induction diagnostics",
    "skip": "Skip to the content",
    "filter": "Filter the entries",
    "search": "Lemma, gloss or frame",
    "status": "Status",
    "flag": "Flag",
    "any": "any",
    "none": "none",
    "lemma": "Lemma",
    "senses": "Senses",
    "frames": "Frames",
    "flags": "Flags",
    "examples": "Examples",
    "shown": "entries shown",
    "sort": "Sort by",
    "gloss": "Gloss",
    "note": "Editor's note",
    "frequency": "frequency",
    "no_frequency": "no count",
    "no_gloss": "(no gloss yet)",
    "no_examples": "No example.",
    "no_frames": "No frame.",
    "legend": "Legend",
    "verb": "verb",
    "slot": "slot",
    "source": "source",
    "other_editions": "This entry in other editions",
    "edition": "Edition",
    "changed": "This entry changed in this edition",
    "see_changes": "see the change log",
    "no_changes": "No changes.",
    "first_edition": "First edition: no earlier edition to compare with.",
    "summary": "Summary",
    "count": "count",
    "cluster_sizes": "Cluster sizes",
    "cluster": "induced sense",
    "occurrences": "occurrences",
    "frame_distribution": "Frames per induced sense",
    "projection": "Occurrence vectors in two dimensions",
    "projection_alt": "Scatter plot of the occurrences of {lemma} projected on their first two "
    "principal components, one colour and marker per induced sense: {senses}.",
    "projection_missing": "No occurrence vectors in this induction folder ({file}): the "
    "projection is not drawn.",
    "calibration": "Threshold calibration",
    "calibration_alt": "Mean scores over pseudo-verbs for each distance threshold; the chosen "
    "threshold {threshold} is marked by a vertical line.",
    "chosen": "chosen threshold",
    "threshold": "distance threshold",
    "score": "mean score over pseudo-verbs",
    "induction_run": "Induction run",
    "representation": "Representation",
    "model": "Model",
    "not_induced": "This verb is not in the induction folder.",
    "generated": "Made by lexbuild",
    "page_nav": "Site",
    "entry_nav": "Senses of this entry",
    "sorted_asc": "sorted ascending",
    "sorted_desc": "sorted descending",
    "status.draft": "draft",
    "status.reviewed": "reviewed",
    "status.approved": "approved",
    "status.retired": "retired",
    "flag.unsupported": "unsupported by the corpus",
    "flag.split-from": "split from",
    "flag.merge-into": "to merge into",
    "flag.other": "other remark",
    "function.subj": "subject",
    "function.refl": "reflexive clitic",
    "function.obj": "direct object",
    "function.iobj": "indirect object",
    "function.obl": "oblique",
    "function.comp": "clausal complement",
    "function.pred": "predicative complement",
}

_FR: dict[str, str] = {
    "site": "Site de relecture",
    "colon": "\u00a0: ",
    "index": "Entrées",
    "changes": "Modifications de cette édition",
    "diagnostics": "Diagnostics de l’induction",
    "skip": "Aller au contenu",
    "filter": "Filtrer les entrées",
    "search": "Lemme, glose ou cadre",
    "status": "Statut",
    "flag": "Signalement",
    "any": "tous",
    "none": "aucun",
    "lemma": "Lemme",
    "senses": "Sens",
    "frames": "Cadres",
    "flags": "Signalements",
    "examples": "Exemples",
    "shown": "entrées affichées",
    "sort": "Trier par",
    "gloss": "Glose",
    "note": "Note de l’éditeur",
    "frequency": "fréquence",
    "no_frequency": "non compté",
    "no_gloss": "(pas encore de glose)",
    "no_examples": "Aucun exemple.",
    "no_frames": "Aucun cadre.",
    "legend": "Légende",
    "verb": "verbe",
    "slot": "position",
    "source": "source",
    "other_editions": "Cette entrée dans les autres éditions",
    "edition": "Édition",
    "changed": "Cette entrée a changé dans cette édition",
    "see_changes": "voir le journal des modifications",
    "no_changes": "Aucune modification.",
    "first_edition": "Première édition : aucune édition antérieure à comparer.",
    "summary": "Résumé",
    "count": "nombre",
    "cluster_sizes": "Taille des groupes",
    "cluster": "sens induit",
    "occurrences": "occurrences",
    "frame_distribution": "Cadres par sens induit",
    "projection": "Vecteurs des occurrences en deux dimensions",
    "projection_alt": "Nuage de points des occurrences de {lemma} projetées sur leurs deux "
    "premières composantes principales, une couleur et un marqueur par sens induit : {senses}.",
    "projection_missing": "Pas de vecteurs d’occurrences dans ce dossier d’induction ({file}) : "
    "la projection n’est pas tracée.",
    "calibration": "Calibrage du seuil",
    "calibration_alt": "Scores moyens sur les pseudo-verbes pour chaque seuil de distance ; le "
    "seuil retenu {threshold} est marqué d’une ligne verticale.",
    "chosen": "seuil retenu",
    "threshold": "seuil de distance",
    "score": "score moyen sur les pseudo-verbes",
    "induction_run": "Induction",
    "representation": "Représentation",
    "model": "Modèle",
    "not_induced": "Ce verbe n’est pas dans le dossier d’induction.",
    "generated": "Produit par lexbuild",
    "page_nav": "Site",
    "entry_nav": "Sens de cette entrée",
    "sorted_asc": "tri croissant",
    "sorted_desc": "tri décroissant",
    "status.draft": "brouillon",
    "status.reviewed": "relu",
    "status.approved": "validé",
    "status.retired": "retiré",
    "flag.unsupported": "non attesté dans le corpus",
    "flag.split-from": "scindé de",
    "flag.merge-into": "à fusionner avec",
    "flag.other": "autre remarque",
    "function.subj": "sujet",
    "function.refl": "clitique réfléchi",
    "function.obj": "objet direct",
    "function.iobj": "objet indirect",
    "function.obl": "complément oblique",
    "function.comp": "complément phrastique",
    "function.pred": "attribut",
}

#: Primary language subtag -> labels; every table has the same keys (a test checks).
LANGUAGES: Mapping[str, Mapping[str, str]] = MappingProxyType(
    {"en": MappingProxyType(_EN), "fr": MappingProxyType(_FR)}
)


def labels_for(language: str) -> tuple[str, Mapping[str, str]]:
    """(language code used, labels) for a BCP 47 tag; English when the project lacks it."""
    primary = language.split("-", 1)[0].lower()
    if primary in LANGUAGES:
        return primary, LANGUAGES[primary]
    return "en", LANGUAGES["en"]
