"""Verb occurrences: one record per verb token, with its argument slots.

The types are fixed here; the extraction from UD trees fills them. Corpus reading knows nothing
of the lexicon model except the ``Slot`` type of a frame.

Conventions every consumer can rely on:

* one occurrence per UPOS ``VERB`` word (``include_auxiliaries`` adds AUX words heading their
  clause, never auxiliaries or copulas);
* a pronominal verb keeps its base lemma and gets a ``refl:CLITIC[se]`` slot (s'agir is lemma
  ``agir`` with ``subj:EXPL refl:CLITIC[se] obl:PP[de]``); an impersonal subject is
  ``subj:EXPL``;
* every occurrence has exactly one subject slot; one the sentence does not express has
  ``Argument.head == -1`` and span ``(-1, -1)`` (``Argument.expressed`` is False): skip those
  when turning arguments into example spans;
* ``arguments`` are sorted with ``model.slot_sort_key`` and ``frame`` is
  ``model.format_frame(slots)``: the canonical frame string, never with optional flags.

The slot rules are listed at the head of the extraction section below.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

from lexbuild.corpus.conllu import OnError, Sentence, Token, iter_sentences
from lexbuild.errors import CorpusError
from lexbuild.lexicon.model import Function, Realisation, Slot, format_frame, slot_sort_key

__all__ = [
    "Argument",
    "LanguageProfile",
    "Occurrence",
    "extract_occurrences",
    "iter_occurrences",
    "profile_for",
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


_PROFILES = {
    "fr": LanguageProfile(
        "fr",
        clitic_pronouns=True,
        has_obl_arg=True,
        infinitive_markers=frozenset({"de", "à"}),
        dative_marker="à",
        pronoun_prepositions=(("dont", "de"),),
        pp_clitics=frozenset({"en", "y"}),
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
# Rules (UD relation -> slot), language-independent unless a profile field says otherwise:
#
#   nsubj, expl:subj / expl (impersonal il, it, there)  -> subj:NP, subj:EXPL
#   csubj                                                -> subj:CLAUSE[mark]
#   obj, obj:lvc / iobj                                  -> obj:NP|CLITIC / iobj:NP|CLITIC
#   iobj "en", "y" (profile.pp_clitics)                  -> obl:CLITIC[en], obl:CLITIC[y]
#   obl:arg (or plain obl with a case marker where the treebank has no obl:arg)
#                                                        -> obl:PP[case + fixed], obl:CLITIC[en]
#   ... its dative PP beside an object or a clause       -> iobj:PP[à] (profile.dative_marker)
#   ccomp                                                -> comp:CLAUSE[mark], comp:INF[de|à]
#   xcomp                                                -> comp:INF[de|à|], pred:AP, pred:NP
#   expl:pv (inherent reflexive)                         -> refl:CLITIC[se]
# Passives (aux:pass, nsubj:pass, csubj:pass, se-passive expl:pass, participle with Voice=Pass
# modifying a noun) are normalised to the active frame: passive subject -> obj (or comp),
# obl:agent -> subj; ``passive`` marks them. Causatives (aux:caus): the causee (obj:agent,
# iobj:agent, obl:agent) is the verb's subject; nsubj:caus (the causer) is not its argument.
# Every occurrence has a subject: one not in the tree (infinitive, imperative, agentless
# passive, participle) is added as an unexpressed argument (head -1); it is subj:EXPL when the
# verb is raised under an impersonal verb ("il semble s'agir de"), the modified noun when a
# present participle modifies it, else subj:NP.
# Adjuncts (obl:mod, obl:tmod, plain obl, advmod, advcl...) are counted, not slotted.

_SUBJECT = {"nsubj", "csubj"}
_PASSIVE_SUBJECT = {"nsubj:pass", "csubj:pass"}
_EXPLETIVE_SUBJECT = {"expl:subj", "expl"}
_SUBJECTS = _SUBJECT | _PASSIVE_SUBJECT | _EXPLETIVE_SUBJECT
_CAUSEE = {"obj:agent", "iobj:agent", "obl:agent"}
_ADJUNCT_BASES = {"advmod", "advcl"}
_ADJUNCT_OBL = {"obl:mod", "obl:tmod", "obl:npmod", "obl:unmarked"}


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


def _children(sentence: Sentence) -> list[list[int]]:
    """0-based dependents of each word (index len(tokens) holds the root's)."""
    kids: list[list[int]] = [[] for _ in range(len(sentence.tokens) + 1)]
    for index, token in enumerate(sentence.tokens):
        kids[token.head - 1 if token.head else -1].append(index)
    return kids


def _word_spans(sentence: Sentence) -> list[tuple[int, int]] | None:
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


def _subtree_span(
    head: int, kids: list[list[int]], spans: list[tuple[int, int]] | None
) -> tuple[int, int]:
    if spans is None:
        return (-1, -1)
    start, end = spans[head]
    stack = list(kids[head])
    while stack:
        node = stack.pop()
        start, end = min(start, spans[node][0]), max(end, spans[node][1])
        stack.extend(kids[node])
    return (start, end)


def _marker(index: int, relations: set[str], sentence: Sentence, kids: list[list[int]]) -> str:
    """Lemmas of the dependents in ``relations`` with their ``fixed`` parts, in word order."""
    words: list[int] = []
    for child in kids[index]:
        if sentence.tokens[child].deprel in relations:
            words.append(child)
            words.extend(k for k in kids[child] if sentence.tokens[k].deprel == "fixed")
    return _clean_marker(" ".join(sentence.tokens[w].lemma for w in sorted(words)))


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


def _argument_slot(
    index: int,
    verb: int,
    sentence: Sentence,
    kids: list[list[int]],
    profile: LanguageProfile,
    passive: bool,
    causative: bool,
) -> Slot | None:
    """The slot a dependent fills, or None when it is not an argument."""
    token = sentence.tokens[index]
    rel = token.deprel
    base = rel.split(":", 1)[0]
    F, R = Function, Realisation
    if rel in _EXPLETIVE_SUBJECT:
        return _SUBJ_EXPL
    if rel == "expl:pv":
        return _slot(F.REFLEXIVE, R.CLITIC, profile.reflexive_marker)
    if rel in _CAUSEE:
        # The causee of a causative, or the agent of a passive, is the active subject.
        return _SUBJ_NP if causative or (passive and rel == "obl:agent") else None
    if rel in _SUBJECT:
        if passive:  # se-passive (expl:pass) annotated with a plain subject
            return (
                _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, sentence, kids))
                if rel == "csubj"
                else _OBJ_NP
            )
        if rel == "csubj":
            return _slot(F.SUBJECT, R.CLAUSE, _marker(index, {"mark"}, sentence, kids))
        return _SUBJ_NP
    if rel in _PASSIVE_SUBJECT:  # the passive subject is the active object
        if rel == "csubj:pass":
            return _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, sentence, kids))
        return _OBJ_NP
    if rel in ("obj", "obj:lvc"):
        clitic = _is_clitic(token, index, verb, profile)
        return _slot(F.OBJECT, R.CLITIC if clitic else R.NP)
    if rel == "iobj":
        if token.upos == "PRON" and token.lemma.lower() in profile.pp_clitics:
            return _slot(F.OBLIQUE, R.CLITIC, token.lemma.lower())
        clitic = _is_clitic(token, index, verb, profile)
        return _slot(F.INDIRECT_OBJECT, R.CLITIC if clitic else R.NP)
    if rel == "obl:arg" or (rel == "obl" and not profile.has_obl_arg):
        return _oblique_slot(index, sentence, kids, profile, require_marker=rel == "obl")
    if rel == "ccomp":
        if token.upos == "VERB" and _infinitive(token):  # "permettre de partir" as ccomp
            return _xcomp_slot(index, sentence, kids, profile)
        return _slot(F.CLAUSAL, R.CLAUSE, _marker(index, {"mark"}, sentence, kids))
    if base == "xcomp":
        return _xcomp_slot(index, sentence, kids, profile)
    return None


def _oblique_slot(
    index: int,
    sentence: Sentence,
    kids: list[list[int]],
    profile: LanguageProfile,
    *,
    require_marker: bool,
) -> Slot | None:
    token = sentence.tokens[index]
    marker = _marker(index, {"case"}, sentence, kids)
    if marker:
        return _slot(Function.OBLIQUE, Realisation.PP, marker)
    if require_marker:  # plain obl without a preposition ("yesterday"): an adjunct
        return None
    lemma = token.lemma.lower()
    for pronoun, preposition in profile.pronoun_prepositions:  # "dont" stands for "de" + NP
        if lemma == pronoun:
            return _slot(Function.OBLIQUE, Realisation.PP, preposition)
    if profile.clitic_pronouns and token.upos == "PRON" and "PronType=Rel" not in token.feats:
        # French "en", "y" (il en dépend, il y pense): the marker is the clitic's lemma
        marker = token.lemma.lower() if token.lemma != "_" else token.form.lower().strip("-'")
        return _slot(Function.OBLIQUE, Realisation.CLITIC, _clean_marker(marker))
    return _slot(Function.OBLIQUE, Realisation.NP)


def _xcomp_slot(
    index: int, sentence: Sentence, kids: list[list[int]], profile: LanguageProfile
) -> Slot | None:
    token = sentence.tokens[index]
    if token.upos in ("VERB", "AUX") and _infinitive(token):
        marker = _marker(index, {"mark", "case"}, sentence, kids)
        kept = marker if marker in profile.infinitive_markers else ""
        return _slot(Function.CLAUSAL, Realisation.INFINITIVE, kept)
    if token.upos == "ADJ" or (token.upos == "VERB" and "VerbForm=Part" in token.feats):
        return _slot(Function.PREDICATIVE, Realisation.AP)
    if token.upos in ("NOUN", "PROPN", "PRON", "NUM"):
        return _slot(Function.PREDICATIVE, Realisation.NP)
    if token.upos == "VERB":
        return _slot(Function.CLAUSAL, Realisation.CLAUSE, _marker(index, {"mark"}, sentence, kids))
    return None


def _is_adjunct(rel: str, profile: LanguageProfile) -> bool:
    base = rel.split(":", 1)[0]
    return base in _ADJUNCT_BASES or rel in _ADJUNCT_OBL or rel == "obl"


def _base(token: Token) -> str:
    return token.deprel.split(":", 1)[0]


def _dependents(verb: int, sentence: Sentence, kids: list[list[int]]) -> list[int]:
    """The verb's own dependents, plus the first conjunct's subject when it has none."""
    own = kids[verb]
    token = sentence.tokens[verb]
    if _base(token) != "conj" or any(sentence.tokens[k].deprel in _SUBJECTS for k in own):
        return own
    first = token.head - 1
    # Walk up a chain of conjuncts to the first one (UD attaches all to the first).
    while _base(sentence.tokens[first]) == "conj":
        first = sentence.tokens[first].head - 1
    # Only an active subject is shared: a passive first conjunct's subject is its object.
    inherited = [k for k in kids[first] if sentence.tokens[k].deprel in _SUBJECT]
    return sorted(own + inherited)


def _participle_modifier(token: Token) -> str:
    """'pass' for a past participle modifying a noun (reduced passive relative), 'act' for a
    present participle doing so, '' otherwise."""
    if token.deprel != "acl" or "VerbForm=Part" not in token.feats:
        return ""
    if "Voice=Pass" in token.feats or "Tense=Past" in token.feats:
        return "pass"
    return "act" if "Tense=Pres" in token.feats else ""


def _implicit_subject(verb: int, sentence: Sentence, kids: list[list[int]]) -> Slot:
    """subj:EXPL for a verb raised under an impersonal one ("il semble s'agir"), else subj:NP."""
    token = sentence.tokens[verb]
    while _base(token) in ("xcomp", "conj") and token.head:
        governor = token.head - 1
        if any(sentence.tokens[k].deprel in _EXPLETIVE_SUBJECT for k in kids[governor]):
            return _SUBJ_EXPL
        if any(sentence.tokens[k].deprel in _SUBJECTS for k in kids[governor]):
            return _SUBJ_NP
        token = sentence.tokens[governor]
    return _SUBJ_NP


def _is_predicate(token: Token, include_auxiliaries: bool) -> bool:
    if token.upos == "VERB":
        return True
    # An AUX that heads its clause ("have" as a main verb), never aux or copula itself.
    return (
        include_auxiliaries
        and token.upos == "AUX"
        and token.deprel.split(":", 1)[0] not in ("aux", "cop")
    )


def extract_occurrences(
    sentence: Sentence,
    profile: LanguageProfile | None = None,
    *,
    include_auxiliaries: bool = False,
) -> list[Occurrence]:
    """One occurrence per verb of the sentence, its arguments in canonical slot order.

    An expletive subject wins over a nominal one (French "il arrive des choses" is
    ``subj:EXPL``); a slot filled twice is kept once (the first dependent).
    """
    profile = profile or LanguageProfile("")
    tokens = sentence.tokens
    kids = _children(sentence)
    spans = _word_spans(sentence)
    words = tuple(t.form for t in tokens)
    lemmas = tuple(t.lemma for t in tokens)
    result: list[Occurrence] = []
    for verb, token in enumerate(tokens):
        if not _is_predicate(token, include_auxiliaries):
            continue
        dependents = _dependents(verb, sentence, kids)
        relations = {tokens[k].deprel for k in kids[verb]}
        modifier = _participle_modifier(token)
        passive = bool(
            relations & {"aux:pass", "expl:pass", *_PASSIVE_SUBJECT}
            or (modifier == "pass" and not relations & {"aux", "aux:tense"})
        )
        causative = "aux:caus" in relations
        arguments: dict[Slot, Argument] = {}
        adjuncts = 0
        for index in dependents:
            slot = _argument_slot(index, verb, sentence, kids, profile, passive, causative)
            if slot is None:
                adjuncts += _is_adjunct(tokens[index].deprel, profile)
                continue
            if slot not in arguments:
                span = _subtree_span(index, kids, spans)
                arguments[slot] = Argument(slot, index, tokens[index].lemma, span)
        _drop_nominal_subject_under_expletive(arguments)
        if modifier and token.head:  # the modified noun: object of a passive, else subject
            noun = token.head - 1
            noun_slot = _OBJ_NP if modifier == "pass" else _SUBJ_NP
            if not any(s.function is noun_slot.function for s in arguments):
                noun_span = spans[noun] if spans is not None else (-1, -1)
                arguments[noun_slot] = Argument(noun_slot, noun, tokens[noun].lemma, noun_span)
        if not any(slot.function is Function.SUBJECT for slot in arguments):
            implicit = _implicit_subject(verb, sentence, kids)
            arguments[implicit] = Argument(implicit, -1, "", (-1, -1))
        if profile.dative_marker:
            _mark_dative(arguments, profile.dative_marker)
        ordered = tuple(sorted(arguments.values(), key=lambda a: slot_sort_key(a.slot)))
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
                arguments=ordered,
                passive=passive,
                causative=causative,
                adjuncts=adjuncts,
            )
        )
    return result


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
) -> Iterator[Occurrence]:
    """Stream the verb occurrences of a corpus, optionally only those of some lemmas."""
    profile = profile_for(language)
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
