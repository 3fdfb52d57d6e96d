"""Verb occurrences: one record per verb token, with its argument slots.

The types are fixed here; the extraction from UD trees fills them. Corpus reading knows nothing
of the lexicon model except the ``Slot`` type of a frame.

Conventions every consumer can rely on:

* one occurrence per UPOS ``VERB`` word (``include_auxiliaries`` adds AUX words heading their
  clause), never an auxiliary or copula whatever its tag, nor a participle used as an
  adjective (modifying a noun with no dependent but punct, cc or advmod);
* a pronominal verb keeps its base lemma and gets a ``refl:CLITIC[se]`` slot (s'agir is lemma
  ``agir`` with ``subj:EXPL refl:CLITIC[se] obl:PP[de]``); an impersonal subject is
  ``subj:EXPL``;
* every occurrence has exactly one subject slot; one the sentence does not express has
  ``Argument.head == -1`` and span ``(-1, -1)`` (``Argument.expressed`` is False): skip those
  when turning arguments into example spans;
* ``arguments`` are sorted with ``model.slot_sort_key`` and ``frame`` is
  ``model.format_frame(slots)``: the canonical frame string, never with optional flags;
* every oblique dependent that could be a prepositional complement (``obl`` with or without a
  subtype, the clitics ``en``/``y``, relative ``dont``) is also kept in ``obliques`` with what
  the tree says of it (label, position, class of its noun), whether or not it made it into
  ``arguments``. Extraction alone decides by the labels (``obl:arg`` in, ``obl:mod`` out); the
  corpus-level decision of lexbuild.corpus.argumenthood replaces that (``iter_occurrences``
  applies it by default), so frames do not depend on the treebank's convention.

The slot rules are listed at the head of the extraction section below.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING, Literal

from lexbuild.corpus.conllu import OnError, Sentence, Token, iter_sentences
from lexbuild.errors import CorpusError
from lexbuild.lexicon.model import Function, Realisation, Slot, format_frame, slot_sort_key

if TYPE_CHECKING:
    from lexbuild.corpus.argumenthood import Decision

__all__ = [
    "Argument",
    "LanguageProfile",
    "Oblique",
    "Occurrence",
    "extract_occurrences",
    "iter_occurrences",
    "label_admits",
    "normalise_relation",
    "profile_for",
    "readmit",
]


@dataclass(frozen=True, slots=True)
class Argument:
    """One dependent of the verb that fills a valency slot."""

    slot: Slot
    head: int  # 0-based index of the argument's head in the sentence's tokens; -1: unexpressed
    lemma: str  # lemma of that head (the clause's verb for a clausal complement); '' unexpressed
    span: tuple[int, int]  # characters [start, end) of its subtree in the text; (-1, -1) unknown

    @property
    def expressed(self) -> bool:
        """False for an implicit subject (infinitive, imperative, agentless passive...)."""
        return self.head >= 0


@dataclass(frozen=True, slots=True)
class Oblique:
    """A dependent that is a prepositional complement or an adjunct, by evidence to weigh.

    ``slot`` is the slot it fills when it is an argument (``obl:PP[de]``, ``obl:CLITIC[en]``,
    ``obl:NP``); ``label`` what the treebank's subtype says: ``arg`` (``obl:arg``, or ``iobj`` for
    a clitic ``en``/``y``), ``mod`` (``obl:mod``, ``obl:tmod``...) or ``''`` (plain ``obl``).
    """

    slot: Slot
    head: int  # 0-based index of its head word
    lemma: str  # lemma of that head (the noun of the PP)
    span: tuple[int, int]  # characters [start, end) of its subtree; (-1, -1) unknown
    label: str  # 'arg', 'mod' or ''
    fronted: bool  # before the verb (not a clitic): a sentence adverbial's place
    noun_class: str  # 'time', 'place', 'manner' or '' (LanguageProfile lexicon)

    def argument(self) -> Argument:
        return Argument(self.slot, self.head, self.lemma, self.span)


@dataclass(frozen=True, slots=True)
class Occurrence:
    """One verb token in a corpus sentence."""

    lemma: str  # the verb's lemma (pronominal use is a 'refl' slot, never 'se X')
    sentence_id: str
    source: str  # corpus file
    text: str  # the sentence text
    token: int  # 0-based index of the verb in ``words``
    char_span: tuple[int, int]  # the verb's characters [start, end) in ``text``; (-1, -1) unknown
    words: tuple[str, ...]  # forms of the sentence's syntactic words, in order
    lemmas: tuple[str, ...]  # their lemmas
    arguments: tuple[Argument, ...]  # in canonical slot order (``model.slot_sort_key``)
    passive: bool = False  # a passive normalised to its active frame
    causative: bool = False  # the verb under a causative auxiliary (French "faire partir")
    adjuncts: int = 0  # obl:mod / advmod / advcl dependents seen (not arguments)
    # Every oblique that could be a complement, admitted to ``arguments`` or not (see above).
    obliques: tuple[Oblique, ...] = ()

    @property
    def slots(self) -> tuple[Slot, ...]:
        return tuple(argument.slot for argument in self.arguments)

    @property
    def frame(self) -> str:
        """The canonical frame string of this occurrence."""
        return format_frame(self.slots)

    @property
    def key(self) -> str:
        """A key unique in a corpus: '<source>#<sentence id>#<token>'."""
        return f"{self.source}#{self.sentence_id}#{self.token}"


# --------------------------------------------------------------------------------- profiles


@dataclass(frozen=True, slots=True)
class LanguageProfile:
    """What differs between languages when UD relations are read as valency slots.

    Subjects are always ``subj:NP``, pronouns included: a French subject clitic alternates
    freely with a noun phrase and does not change the frame. Object and dative pronouns become
    ``CLITIC`` only where ``clitic_pronouns`` is set (French), since there they sit apart from
    the full phrase (before the verb) and are what a dictionary wants to show.
    """

    language: str
    clitic_pronouns: bool = False  # personal pronoun obj/iobj before the verb -> CLITIC
    # Treebanks that mark arguments with obl:arg: plain obl is then an adjunct. Treebanks
    # without it (English EWT) get plain obl with a preposition counted as an argument.
    has_obl_arg: bool = False
    infinitive_markers: frozenset[str] = field(default_factory=frozenset)  # kept on comp:INF
    reflexive_marker: str = "se"  # the marker of refl:CLITIC, whatever the clitic's lemma
    # The preposition of the dative: its PP is ``iobj:PP[à]`` when the verb also has a direct
    # object or a clausal complement (donner qch à qn, permettre à qn de...), else ``obl``
    # (penser à qch). Empty: no dative PP in the language's profile.
    dative_marker: str = ""
    # Relative pronouns that stand for a whole PP, and the preposition they stand for.
    pronoun_prepositions: tuple[tuple[str, str], ...] = ()
    # Clitics that stand for a prepositional complement (French "en" = de + NP, "y" = à + NP):
    # ``obl:CLITIC[en]`` even where the treebank attaches them as ``iobj`` (UD French GSD does).
    pp_clitics: frozenset[str] = field(default_factory=frozenset)
    # Clitic forms that are always reflexive (French se, s'), and the personal clitics that are
    # reflexive when they agree with the subject ("je me lave", not "il me voit"): form ->
    # (person, number or '' for either: "vous" of politeness is singular with a plural verb).
    reflexive_forms: frozenset[str] = field(default_factory=frozenset)
    personal_clitics: tuple[tuple[str, str, str], ...] = ()
    # Nouns of time, place and manner: their PP is an adjunct unless the verb selects it.
    time_nouns: frozenset[str] = field(default_factory=frozenset)
    place_nouns: frozenset[str] = field(default_factory=frozenset)
    manner_nouns: frozenset[str] = field(default_factory=frozenset)


def _words(text: str) -> frozenset[str]:
    return frozenset(text.split())


# A small lexicon of the project's own (common practice: time, place and manner expressions are
# the textbook adjuncts; the lists are written from memory, not taken from a resource).
_FR_TIME = _words(
    """an année mois semaine jour journée heure minute seconde siècle décennie époque période
    moment instant fois matin matinée soir soirée nuit midi minuit aube date saison printemps
    été automne hiver week-end veille lendemain début fin milieu cours lors temps durée délai
    janvier février mars avril mai juin juillet août septembre octobre novembre décembre
    lundi mardi mercredi jeudi vendredi samedi dimanche aujourd'hui hier demain passé avenir
    fois-ci trimestre semestre"""
)
_FR_PLACE = _words(
    """lieu endroit ville village pays région département commune capitale quartier rue
    avenue boulevard route chemin côté bord centre nord sud est ouest intérieur extérieur
    étranger monde territoire zone secteur site île côte mer océan montagne campagne
    province continent europe france paris étage niveau sein travers environs alentours
    domicile maison bureau"""
)
_FR_MANNER = _words(
    """manière façon sorte mode moyen aide biais intermédiaire raison cause titre cas effet
    faveur exemple rapport égard"""
)

_PROFILES = {
    "fr": LanguageProfile(
        "fr",
        clitic_pronouns=True,
        has_obl_arg=True,
        infinitive_markers=frozenset({"de", "à"}),
        dative_marker="à",
        pronoun_prepositions=(("dont", "de"),),
        pp_clitics=frozenset({"en", "y"}),
        reflexive_forms=frozenset({"se", "s'", "s’"}),
        personal_clitics=(
            ("me", "1", "Sing"),
            ("m'", "1", "Sing"),
            ("m’", "1", "Sing"),
            ("moi", "1", "Sing"),
            ("te", "2", "Sing"),
            ("t'", "2", "Sing"),
            ("t’", "2", "Sing"),
            ("toi", "2", "Sing"),
            ("nous", "1", "Plur"),
            ("vous", "2", ""),
        ),
        time_nouns=_FR_TIME,
        place_nouns=_FR_PLACE,
        manner_nouns=_FR_MANNER,
    ),
    # English "to" introduces almost every infinitive, so it tells nothing about the verb.
    "en": LanguageProfile("en"),
}


def profile_for(language: str) -> LanguageProfile:
    """The profile of a language (by its primary subtag); unknown: the core rules only."""
    primary = language.split("-")[0].lower()
    return _PROFILES.get(primary, LanguageProfile(primary))


# ------------------------------------------------------------------------------- extraction
#
# Relations are first normalised (``normalise_relation``: the one place where the subtypes of
# different treebanks and parsers are mapped to those the rules read). Then, UD relation ->
# slot, language-independent unless a profile field says otherwise:
#
#   nsubj, expl:subj (impersonal il, it, there)          -> subj:NP, subj:EXPL
#   csubj                                                -> subj:CLAUSE[mark]
#   obj / iobj                                           -> obj:NP|CLITIC / iobj:NP|CLITIC
#   a reflexive clitic: expl:pv; expl:comp/obj/iobj/pass, obj, iobj or obl on a clitic that is
#   always reflexive (se, s') or marked Reflex=Yes; obj/iobj/expl me, te, nous, vous agreeing
#   in person and number with the subject ("je me lave", not "il me voit")
#                                                        -> refl:CLITIC[se]
#   obl (any subtype but agent) / iobj "en", "y" (profile.pp_clitics) / relative "dont"
#                                                        -> an ``Oblique`` candidate:
#                              obl:PP[case + fixed], obl:CLITIC[en], obl:PP[de], obl:NP;
#                              an argument when admitted (by the labels here: obl:arg, iobj;
#                              by the corpus-level decision in lexbuild.corpus.argumenthood)
#   ... an admitted à-PP beside an object or a clause    -> iobj:PP[à] (profile.dative_marker)
#   ccomp                                                -> comp:CLAUSE[mark], comp:INF[de|à]
#   xcomp                                                -> comp:INF[de|à|], pred:AP, pred:NP
# Passives (aux:pass, nsubj:pass, csubj:pass, participle with Voice=Pass modifying a noun) are
# normalised to the active frame: passive subject -> obj (or comp), obl:agent -> subj;
# ``passive`` marks them. The se-passive (expl:pass on a reflexive clitic, "le poisson se vend")
# is a pronominal use: its frame is the surface one, subj:NP refl:CLITIC[se], since treebanks and
# parsers disagree on whether that se is passive (GSD expl:pass), inherent (expl:pv) or an
# object; ``passive`` still marks it. Causatives (aux:caus): the causee (obj:agent, iobj:agent,
# obl:agent) is the verb's subject; nsubj:caus (the causer) is not its argument.
# Every occurrence has a subject: one not in the tree (infinitive, imperative, agentless
# passive, participle) is added as an unexpressed argument (head -1); it is subj:EXPL when the
# verb is raised under an impersonal verb ("il semble s'agir de"), the modified noun when a
# present participle modifies it, else subj:NP.
# Adjuncts (obliques not admitted, advmod, advcl...) are counted, not slotted.
# A participle modifying a noun (acl, or amod as UD English writes it) with no dependent but
# punct, cc or advmod ("les filets réparés") is an adjectival use and no occurrence: treebanks
# and parsers tag it ADJ or VERB inconsistently (benchmarks/parse_agreement.py counts how
# often), and many are lexicalised adjectives ("à un moment donné").
#
# Every walk over the tree is linear in the sentence's length (chains of conjuncts or of
# xcomp are followed once, with memos), so a 20,000-word sentence costs no more per word.

_SUBJECT = {"nsubj", "csubj"}
_PASSIVE_SUBJECT = {"nsubj:pass", "csubj:pass"}
_EXPLETIVE_SUBJECT = {"expl:subj"}
_SUBJECTS = _SUBJECT | _PASSIVE_SUBJECT | _EXPLETIVE_SUBJECT
_CAUSEE = {"obj:agent", "iobj:agent", "obl:agent"}
_ADJUNCT_BASES = {"advmod", "advcl"}
_ADJECTIVAL_PARTICIPLE_DEPENDENTS = {"punct", "cc", "advmod"}

# Subtypes that say the same thing in different treebanks and parsers -> the one the rules read.
_RELATION_ALIASES = {
    "expl": "expl:subj",  # English "it", "there"; French treebanks write expl:subj
    "expl:impers": "expl:subj",
    "nsubj:outer": "nsubj",
    "csubj:outer": "csubj",
    "nsubj:expl": "expl:subj",
    "obj:lvc": "obj",
    "obl:tmod": "obl:mod",
    "obl:npmod": "obl:mod",
    "obl:unmarked": "obl:mod",
    "obl:lmod": "obl:mod",
    "xcomp:pred": "xcomp",
    "xcomp:obj": "xcomp",
    "xcomp:subj": "xcomp",
    "ccomp:obj": "ccomp",
}
# Relations a reflexive clitic comes with, whatever the convention (UD French: expl:pv for
# inherent, obj/iobj for true reflexives, expl:pass for the se-passive; spaCy: expl:comp).
_REFLEXIVE_BEARERS = {"expl:pv", "expl:comp", "expl:obj", "expl:iobj", "expl:pass", "obj", "iobj"}


def normalise_relation(deprel: str) -> str:
    """The relation as the slot rules read it (subtypes of other conventions mapped)."""
    return _RELATION_ALIASES.get(deprel, deprel)


@lru_cache(maxsize=4096)
def _slot(function: Function, realisation: Realisation, marker: str = "") -> Slot:
    # Slots are pydantic models: cached, since a corpus repeats the same few hundred.
    return Slot(function=function, realisation=realisation, marker=marker)


_SUBJ_NP = _slot(Function.SUBJECT, Realisation.NP)
_SUBJ_EXPL = _slot(Function.SUBJECT, Realisation.EXPLETIVE)
_OBJ_NP = _slot(Function.OBJECT, Realisation.NP)


def _clean_marker(text: str) -> str:
    """A marker the frame syntax accepts: lower case, single spaces, no brackets."""
    return " ".join(text.lower().replace("[", " ").replace("]", " ").split())


def _feature(token: Token, name: str) -> str:
    """The value of one FEATS feature ('' when absent)."""
    for item in token.feats.split("|"):
        key, _, value = item.partition("=")
        if key == name:
            return value
    return ""


class _Tree:
    """One sentence's tree with what every verb's extraction reads, computed once."""

    def __init__(self, sentence: Sentence) -> None:
        self.sentence = sentence
        self.tokens = sentence.tokens
        n = len(self.tokens)
        self.relations = [normalise_relation(t.deprel) for t in self.tokens]
        self.bases = [r.split(":", 1)[0] for r in self.relations]
        kids: list[list[int]] = [[] for _ in range(n + 1)]  # index n holds the root's
        for index, token in enumerate(self.tokens):
            kids[token.head - 1 if 0 < token.head <= n else n].append(index)
        self.kids = kids
        self.spans = word_spans(sentence)
        self._subtree: list[tuple[int, int]] | None = None
        self._first: dict[int, int] = {}
        self._implicit: dict[int, Slot] = {}

    def governor(self, index: int) -> int:
        """0-based index of the word's head, -1 for the root."""
        head = self.tokens[index].head
        return head - 1 if 0 < head <= len(self.tokens) else -1

    def has_child(self, index: int, relations: set[str]) -> bool:
        return any(self.relations[k] in relations for k in self.kids[index])

    def subtree_span(self, index: int) -> tuple[int, int]:
        """Characters [start, end) covered by the word's subtree; (-1, -1) unknown."""
        if self.spans is None:
            return (-1, -1)
        if self._subtree is None:
            self._subtree = _subtree_spans(self.kids, self.spans)
        return self._subtree[index]

    def first_conjunct(self, index: int) -> int:
        """The first conjunct of a chain of ``conj`` (UD attaches all to the first; some trees
        chain them), found once per chain."""
        path: list[int] = []
        node = index
        while self.bases[node] == "conj" and node not in self._first:
            path.append(node)
            up = self.governor(node)
            if up < 0 or up in path:  # the root, or a cycle the reader let through
                break
            node = up
        first = self._first.get(node, node)
        for visited in path:
            self._first[visited] = first
        return first

    def implicit_subject(self, verb: int) -> Slot:
        """subj:EXPL for a verb raised under an impersonal one ("il semble s'agir"), else
        subj:NP: the first governor up a chain of xcomp/conj that has a subject decides."""
        path: list[int] = []
        node = verb
        result = _SUBJ_NP
        while node not in self._implicit:
            if self.bases[node] not in ("xcomp", "conj"):
                break
            governor = self.governor(node)
            if governor < 0 or governor in path:
                break
            path.append(node)
            if self.has_child(governor, _EXPLETIVE_SUBJECT):
                result = _SUBJ_EXPL
                break
            if self.has_child(governor, _SUBJECTS):
                break
            node = governor
        else:
            result = self._implicit[node]
        for visited in path:
            self._implicit[visited] = result
        return result


def word_spans(sentence: Sentence) -> list[tuple[int, int]] | None:
    """Character span of each word in the text, or None when the forms cannot be aligned."""
    text, tokens = sentence.text, sentence.tokens
    ranges = {first: (last, form) for first, last, form, _ in sentence.multiword}
    spans: list[tuple[int, int]] = []
    position = 0
    index = 0
    while index < len(tokens):
        first = tokens[index].id
        last, form = ranges.get(first, (first, tokens[index].form))
        while position < len(text) and text[position].isspace():
            position += 1
        if not text.startswith(form, position):
            return None
        span = (position, position + len(form))
        spans.extend([span] * (last - first + 1))  # words of a multiword token share it
        position = span[1]
        index += last - first + 1
    return spans if len(spans) == len(tokens) else None


def _subtree_spans(kids: list[list[int]], spans: list[tuple[int, int]]) -> list[tuple[int, int]]:
    """The span of every word's subtree, children before parents: one pass over the tree."""
    order: list[int] = list(kids[-1])
    seen = set(order)
    position = 0
    while position < len(order):
        for child in kids[order[position]]:
            if child not in seen:
                seen.add(child)
                order.append(child)
        position += 1
    result = list(spans)
    for node in reversed(order):
        start, end = result[node]
        for child in kids[node]:
            start, end = min(start, result[child][0]), max(end, result[child][1])
        result[node] = (start, end)
    return result


def _marker(index: int, relations: set[str], tree: _Tree) -> str:
    """Lemmas of the dependents in ``relations`` with their ``fixed`` parts, in word order."""
    words: list[int] = []
    for child in tree.kids[index]:
        if tree.relations[child] in relations:
            words.append(child)
            words.extend(k for k in tree.kids[child] if tree.relations[k] == "fixed")
    return _clean_marker(" ".join(tree.tokens[w].lemma for w in sorted(words)))


def _is_clitic(token: Token, index: int, verb: int, profile: LanguageProfile) -> bool:
    # A personal pronoun before its verb (or hyphenated after an imperative: "donne-le").
    # Parsers that leave PronType out (spaCy's French pipelines) still give Person.
    personal = "PronType=Prs" in token.feats or (
        "Person=" in token.feats and "PronType=" not in token.feats
    )
    return (
        profile.clitic_pronouns
        and token.upos == "PRON"
        and personal
        and (index < verb or token.form.startswith("-"))
    )


def _infinitive(token: Token) -> bool:
    return "VerbForm=Inf" in token.feats


def _subject_agreement(verb: int, dependents: list[int], tree: _Tree) -> tuple[str, str]:
    """Person and number of the verb's subject: its subject's features, else the verb's own
    (finite verbs agree), else those of the verbs it is an xcomp/conj of ('' when unknown)."""
    node, deps = verb, dependents
    for _ in range(8):  # bounded: a controller is a few levels up at most
        for k in deps:
            if tree.relations[k] in ("nsubj", "nsubj:pass"):
                subject = tree.tokens[k]
                person = _feature(subject, "Person") or (
                    "3" if subject.upos in ("NOUN", "PROPN", "NUM") else ""
                )
                return person, _feature(subject, "Number")
        token = tree.tokens[node]
        if _feature(token, "Person"):
            return _feature(token, "Person"), _feature(token, "Number")
        if tree.bases[node] not in ("xcomp", "conj") or tree.governor(node) < 0:
            break
        governor = tree.governor(node)
        if tree.bases[node] == "xcomp":
            # Object control ("permettez-moi de vous dire"): the object is the controller.
            for k in tree.kids[governor]:
                if k != node and tree.relations[k] in ("obj", "iobj"):
                    controller = tree.tokens[k]
                    return _feature(controller, "Person") or "3", _feature(controller, "Number")
        node = governor
        deps = tree.kids[node]
    return "", ""


def _is_reflexive(
    index: int,
    verb: int,
    tree: _Tree,
    profile: LanguageProfile,
    agreement: tuple[str, str],
) -> bool:
    """Whether a clitic dependent is the reflexive of a pronominal use (see the rules)."""
    token = tree.tokens[index]
    relation = tree.relations[index]
    if relation == "expl:pv":
        return True
    if token.upos != "PRON" or not profile.clitic_pronouns:
        return False
    form = token.form.lower().lstrip("-")
    bearer = relation in _REFLEXIVE_BEARERS or tree.bases[index] == "obl"
    if bearer and (form in profile.reflexive_forms or "Reflex=Yes" in token.feats):
        return index < verb or token.form.startswith("-")
    if relation not in _REFLEXIVE_BEARERS:
        return False
    for clitic, person, number in profile.personal_clitics:
        if form == clitic:
            subject_person, subject_number = agreement
            return (
                person == subject_person
                and (not number or not subject_number or number == subject_number)
                and (index < verb or token.form.startswith("-") or form in ("moi", "toi"))
            )
    return False


def _argument_slot(
    index: int,
    verb: int,
    tree: _Tree,
    profile: LanguageProfile,
    passive: bool,
    causative: bool,
) -> Slot | None:
    """The slot a dependent fills, or None when it is not an argument (obliques aside)."""
    token = tree.tokens[index]
    rel = tree.relations[index]
    F, R = Function, Realisation
    if rel in _EXPLETIVE_SUBJECT:
        return _SUBJ_EXPL
    if rel in _CAUSEE:
        # The causee of a causative, or the agent of a passive, is the active subject.
        return _SUBJ_NP if causative or (passive and rel == "obl:agent") else None
    if rel in _SUBJECT:
        if passive:  # a passive annotated with a plain subject
            return (
                _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, tree))
                if rel == "csubj"
                else _OBJ_NP
            )
        if rel == "csubj":
            return _slot(F.SUBJECT, R.CLAUSE, _marker(index, {"mark"}, tree))
        return _SUBJ_NP
    if rel in _PASSIVE_SUBJECT:
        if not passive:  # the se-passive keeps its surface subject (see the rules)
            return (
                _SUBJ_NP
                if rel == "nsubj:pass"
                else _slot(F.SUBJECT, R.CLAUSE, _marker(index, {"mark"}, tree))
            )
        if rel == "csubj:pass":  # the passive subject is the active object
            return _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, tree))
        return _OBJ_NP
    if rel == "obj":
        clitic = _is_clitic(token, index, verb, profile)
        return _slot(F.OBJECT, R.CLITIC if clitic else R.NP)
    if rel == "iobj":
        clitic = _is_clitic(token, index, verb, profile)
        return _slot(F.INDIRECT_OBJECT, R.CLITIC if clitic else R.NP)
    if rel == "ccomp":
        if token.upos == "VERB" and _infinitive(token):  # "permettre de partir" as ccomp
            return _xcomp_slot(index, tree, profile)
        return _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, tree))
    if tree.bases[index] == "xcomp":
        return _xcomp_slot(index, tree, profile)
    return None


def _oblique(index: int, verb: int, tree: _Tree, profile: LanguageProfile) -> Oblique | None:
    """The dependent as an oblique candidate, or None when it cannot be one."""
    token = tree.tokens[index]
    rel = tree.relations[index]
    lemma = token.lemma.lower()
    if rel == "iobj" and token.upos == "PRON" and lemma in profile.pp_clitics:
        # GSD attaches "en"/"y" as iobj: they stand for a de-/à-complement, not a dative.
        slot, label = _slot(Function.OBLIQUE, Realisation.CLITIC, lemma), "arg"
    elif tree.bases[index] == "obl" and rel != "obl:agent":
        found = _oblique_slot(index, tree, profile)
        if found is None:
            return None
        slot = found
        subtype = rel.partition(":")[2]
        label = "arg" if subtype == "arg" else "mod" if subtype else ""
    else:
        return None
    return Oblique(
        slot=slot,
        head=index,
        lemma=token.lemma,
        span=tree.subtree_span(index),
        label=label,
        fronted=index < verb and token.upos != "PRON",
        noun_class=_noun_class(token, profile),
    )


def _noun_class(token: Token, profile: LanguageProfile) -> str:
    lemma = token.lemma.lower()
    if lemma in profile.time_nouns or _is_year(token):
        return "time"
    if lemma in profile.place_nouns:
        return "place"
    if lemma in profile.manner_nouns:
        return "manner"
    return ""


def _is_year(token: Token) -> bool:
    # Four digits from 1000 to 2099: in running text almost always a year (common practice).
    form = token.form
    return token.upos == "NUM" and len(form) == 4 and form.isdigit() and "1000" <= form < "2100"


def _oblique_slot(index: int, tree: _Tree, profile: LanguageProfile) -> Slot | None:
    token = tree.tokens[index]
    marker = _marker(index, {"case"}, tree)
    if marker:
        return _slot(Function.OBLIQUE, Realisation.PP, marker)
    lemma = token.lemma.lower()
    for pronoun, preposition in profile.pronoun_prepositions:  # "dont" stands for "de" + NP
        if lemma == pronoun:
            return _slot(Function.OBLIQUE, Realisation.PP, preposition)
    if profile.clitic_pronouns and token.upos == "PRON" and "PronType=Rel" not in token.feats:
        # French "en", "y" (il en dépend, il y pense): the marker is the clitic's lemma
        marker = token.lemma.lower() if token.lemma != "_" else token.form.lower().strip("-'")
        marker = _clean_marker(marker)
        return _slot(Function.OBLIQUE, Realisation.CLITIC, marker) if marker else None
    return _slot(Function.OBLIQUE, Realisation.NP)


def _xcomp_slot(index: int, tree: _Tree, profile: LanguageProfile) -> Slot | None:
    token = tree.tokens[index]
    if token.upos in ("VERB", "AUX") and _infinitive(token):
        marker = _marker(index, {"mark", "case"}, tree)
        kept = marker if marker in profile.infinitive_markers else ""
        return _slot(Function.CLAUSAL, Realisation.INFINITIVE, kept)
    if token.upos == "ADJ" or (token.upos == "VERB" and "VerbForm=Part" in token.feats):
        return _slot(Function.PREDICATIVE, Realisation.AP)
    if token.upos in ("NOUN", "PROPN", "PRON", "NUM"):
        return _slot(Function.PREDICATIVE, Realisation.NP)
    if token.upos == "VERB":
        return _slot(Function.CLAUSAL, Realisation.CLAUSE, _marker(index, {"mark"}, tree))
    return None


def _is_adjunct(index: int, tree: _Tree) -> bool:
    return tree.bases[index] in _ADJUNCT_BASES


def _dependents(verb: int, tree: _Tree) -> list[int]:
    """The verb's own dependents, plus the first conjunct's subject when it has none."""
    own = tree.kids[verb]
    if tree.bases[verb] != "conj" or tree.has_child(verb, _SUBJECTS):
        return own
    first = tree.first_conjunct(verb)
    # Only an active subject is shared: a passive first conjunct's subject is its object.
    inherited = [k for k in tree.kids[first] if tree.relations[k] in _SUBJECT]
    return sorted(own + inherited) if inherited else own


def _participle_modifier(token: Token) -> str:
    """'pass' for a past participle modifying a noun (reduced passive relative), 'act' for a
    present participle doing so, '' otherwise."""
    # UD English writes a verbal participle modifying a noun as amod (EWT "the attached file"),
    # UD French as acl: the same construction.
    if token.deprel not in ("acl", "amod") or "VerbForm=Part" not in token.feats:
        return ""
    if "Voice=Pass" in token.feats or "Tense=Past" in token.feats:
        return "pass"
    return "act" if "Tense=Pres" in token.feats else ""


def _is_predicate(token: Token, include_auxiliaries: bool) -> bool:
    # An auxiliary or copula is a function word whatever its tag (parsers tag some VERB); an
    # AUX that heads its clause ("have" as a main verb) counts on request.
    if token.deprel.split(":", 1)[0] in ("aux", "cop"):
        return False
    return token.upos == "VERB" or (include_auxiliaries and token.upos == "AUX")


def label_admits(oblique: Oblique, profile: LanguageProfile) -> bool:
    """The decision by the labels alone: ``obl:arg`` (and iobj en/y) in; where the profile
    says the language's treebanks have no ``obl:arg``, plain ``obl`` with a preposition too."""
    if oblique.label == "arg":
        return True
    return (
        oblique.label == ""
        and not profile.has_obl_arg
        and oblique.slot.realisation is Realisation.PP
    )


def extract_occurrences(
    sentence: Sentence,
    profile: LanguageProfile | None = None,
    *,
    include_auxiliaries: bool = False,
) -> list[Occurrence]:
    """One occurrence per verb of the sentence, its arguments in canonical slot order.

    Obliques are admitted by their labels (``label_admits``); lexbuild.corpus.argumenthood
    re-decides them from corpus-wide evidence. An expletive subject wins over a nominal one
    (French "il arrive des choses" is ``subj:EXPL``); a slot filled twice is kept once (the
    first dependent).
    """
    profile = profile or LanguageProfile("")
    tree = _Tree(sentence)
    tokens = tree.tokens
    spans = tree.spans
    words = tuple(t.form for t in tokens)
    lemmas = tuple(t.lemma for t in tokens)
    result: list[Occurrence] = []
    for verb, token in enumerate(tokens):
        if not _is_predicate(token, include_auxiliaries):
            continue
        dependents = _dependents(verb, tree)
        relations = {tree.relations[k] for k in tree.kids[verb]}
        modifier = _participle_modifier(token)
        if modifier and relations <= _ADJECTIVAL_PARTICIPLE_DEPENDENTS:
            continue  # an adjectival use (see the rules above)
        agreement = _subject_agreement(verb, dependents, tree)
        reflexives = [
            k for k in tree.kids[verb] if _is_reflexive(k, verb, tree, profile, agreement)
        ]
        se_passive = any(tree.relations[k] == "expl:pass" for k in reflexives)
        passive = not se_passive and bool(
            relations & {"aux:pass", "expl:pass", *_PASSIVE_SUBJECT}
            or (modifier == "pass" and not relations & {"aux", "aux:tense"})
        )
        causative = "aux:caus" in relations
        arguments: dict[Slot, Argument] = {}
        obliques: list[Oblique] = []
        adjuncts = 0
        refl = _slot(Function.REFLEXIVE, Realisation.CLITIC, profile.reflexive_marker)
        for index in dependents:
            if index in reflexives:
                slot: Slot | None = refl
            else:
                oblique = _oblique(index, verb, tree, profile)
                if oblique is not None:
                    obliques.append(oblique)
                    continue
                slot = _argument_slot(index, verb, tree, profile, passive, causative)
            if slot is None:
                adjuncts += _is_adjunct(index, tree)
                continue
            if slot not in arguments:
                arguments[slot] = Argument(
                    slot, index, tokens[index].lemma, tree.subtree_span(index)
                )
        _drop_nominal_subject_under_expletive(arguments)
        if modifier and 0 < token.head <= len(tokens):
            # The modified noun: object of a passive, else subject.
            noun = token.head - 1
            noun_slot = _OBJ_NP if modifier == "pass" else _SUBJ_NP
            if not any(s.function is noun_slot.function for s in arguments):
                noun_span = spans[noun] if spans is not None else (-1, -1)
                arguments[noun_slot] = Argument(noun_slot, noun, tokens[noun].lemma, noun_span)
        if not any(slot.function is Function.SUBJECT for slot in arguments):
            implicit = tree.implicit_subject(verb)
            arguments[implicit] = Argument(implicit, -1, "", (-1, -1))
        if profile.dative_marker:
            obliques = _as_datives(obliques, arguments, profile.dative_marker)
        admitted = [o for o in obliques if label_admits(o, profile)]
        result.append(
            Occurrence(
                # NFC once, here where the lemma enters the pipeline (sources do the same).
                lemma=unicodedata.normalize("NFC", token.lemma),
                sentence_id=sentence.id,
                source=sentence.source,
                text=sentence.text,
                token=verb,
                char_span=spans[verb] if spans is not None else (-1, -1),
                words=words,
                lemmas=lemmas,
                arguments=_assemble(list(arguments.values()), admitted, profile),
                passive=passive or se_passive,
                causative=causative,
                adjuncts=adjuncts + len(obliques) - len(admitted),
                obliques=tuple(obliques),
            )
        )
    return result


def _as_datives(
    obliques: list[Oblique], arguments: dict[Slot, Argument], marker: str
) -> list[Oblique]:
    """An à-PP beside an object or a clausal complement is weighed as the dative it would be
    (``iobj:PP[à]``): datives go with other verbs (donner, permettre) than à-complements do."""
    functions = {slot.function for slot in arguments}
    if Function.INDIRECT_OBJECT in functions or not functions & {
        Function.OBJECT,
        Function.CLAUSAL,
    }:
        return obliques
    oblique = _slot(Function.OBLIQUE, Realisation.PP, marker)
    dative = _slot(Function.INDIRECT_OBJECT, Realisation.PP, marker)
    return [replace(o, slot=dative) if o.slot == oblique else o for o in obliques]


def _assemble(
    core: list[Argument], admitted: Iterable[Oblique], profile: LanguageProfile
) -> tuple[Argument, ...]:
    """Core arguments plus the admitted obliques (a slot filled twice kept once), the dative
    marked, in canonical slot order."""
    arguments = {argument.slot: argument for argument in core}
    for oblique in admitted:
        arguments.setdefault(oblique.slot, oblique.argument())
    if profile.dative_marker:
        _mark_dative(arguments, profile.dative_marker)
    return tuple(sorted(arguments.values(), key=lambda a: slot_sort_key(a.slot)))


def readmit(occurrence: Occurrence, admit: Iterable[bool], profile: LanguageProfile) -> Occurrence:
    """The occurrence with its obliques admitted as ``admit`` says (one flag per oblique, in
    order): what a corpus-level argument/adjunct decision applies."""
    flags = list(admit)
    if len(flags) != len(occurrence.obliques):
        raise ValueError(f"{len(flags)} flags for {len(occurrence.obliques)} obliques")
    heads = {oblique.head for oblique in occurrence.obliques}
    core = [a for a in occurrence.arguments if a.head < 0 or a.head not in heads]
    before = sum(a.head in heads for a in occurrence.arguments if a.head >= 0)
    admitted = [o for o, flag in zip(occurrence.obliques, flags, strict=True) if flag]
    arguments = _assemble(core, admitted, profile)
    after = sum(a.head in heads for a in arguments if a.head >= 0)
    # Adjuncts: obliques left out now instead of those left out before.
    adjuncts = occurrence.adjuncts + before - after
    return replace(occurrence, arguments=arguments, adjuncts=adjuncts)


def _drop_nominal_subject_under_expletive(arguments: dict[Slot, Argument]) -> None:
    if _SUBJ_EXPL in arguments:
        for slot in [s for s in arguments if s.function is Function.SUBJECT and s != _SUBJ_EXPL]:
            del arguments[slot]


def _mark_dative(arguments: dict[Slot, Argument], marker: str) -> None:
    """obl:PP[à] -> iobj:PP[à] when the verb also has a direct object or a clausal complement
    (the dative is then the second complement: donner qch à qn, permettre à qn de partir)."""
    oblique = _slot(Function.OBLIQUE, Realisation.PP, marker)
    if oblique not in arguments or any(s.function is Function.INDIRECT_OBJECT for s in arguments):
        return
    if any(s.function in (Function.OBJECT, Function.CLAUSAL) for s in arguments):
        dative = _slot(Function.INDIRECT_OBJECT, Realisation.PP, marker)
        argument = arguments.pop(oblique)
        arguments[dative] = Argument(dative, argument.head, argument.lemma, argument.span)


def iter_occurrences(
    paths: str | Path | Iterable[str | Path],
    *,
    language: str = "fr",
    lemmas: Iterable[str] | None = None,
    on_error: OnError = "raise",
    errors: list[CorpusError] | None = None,
    include_auxiliaries: bool = False,
    obliques: Literal["evidence", "labels"] = "evidence",
    decision: Decision | None = None,
) -> Iterator[Occurrence]:
    """Stream the verb occurrences of a corpus, optionally only those of some lemmas.

    Obliques are admitted by ``decision`` when given; else, with ``obliques="evidence"`` (the
    default), by the decision lexbuild.corpus.argumenthood takes over the whole corpus, which
    costs a first pass over the files (all verbs: the rates are corpus-wide); with
    ``obliques="labels"``, by the treebank's labels alone (one pass).
    """
    from lexbuild.corpus.argumenthood import apply, count_obliques

    profile = profile_for(language)
    if not isinstance(paths, str | Path):
        paths = list(paths)  # read twice
    if decision is None and obliques == "evidence":
        decision = count_obliques(
            paths, language=language, on_error=on_error, include_auxiliaries=include_auxiliaries
        ).decide()
    stream = _extract(paths, profile, lemmas, on_error, errors, include_auxiliaries)
    if decision is None:
        yield from stream
    else:
        yield from apply(stream, decision, profile)


def _extract(
    paths: str | Path | list[str | Path],
    profile: LanguageProfile,
    lemmas: Iterable[str] | None,
    on_error: OnError,
    errors: list[CorpusError] | None,
    include_auxiliaries: bool,
) -> Iterator[Occurrence]:
    wanted = None if lemmas is None else frozenset(unicodedata.normalize("NFC", x) for x in lemmas)
    for sentence in iter_sentences(paths, on_error=on_error, errors=errors):
        # Skip whole sentences without a wanted lemma: extraction costs far more than this.
        if wanted is not None and not any(
            unicodedata.normalize("NFC", t.lemma) in wanted for t in sentence.tokens
        ):
            continue
        for occurrence in extract_occurrences(
            sentence, profile, include_auxiliaries=include_auxiliaries
        ):
            if wanted is None or occurrence.lemma in wanted:
                yield occurrence
