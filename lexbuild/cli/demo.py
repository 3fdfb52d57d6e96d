"""``lexbuild demo``: the main job end to end on the shipped sample, offline."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lexbuild.cli.common import EXIT_FINDINGS, EXIT_OK, add_schemas_option

if TYPE_CHECKING:
    from lexbuild.demo import DemoSummary


def register(subparsers: Any) -> None:
    demo = subparsers.add_parser(
        "demo",
        help="run the whole job on the shipped demo corpus and sample dictionary",
        description="Parse the demo's raw French text, induce verb senses with the embedded "
        "default representation guided by the curated senses of sample_lexicon/, extract "
        "frames, merge into a copy of sample_lexicon/, release and validate an edition, and "
        "print a summary with guided and unguided scores against the demo's gold sense "
        "labels. Nothing is downloaded.",
    )
    demo.add_argument("--output", type=Path, default=Path("demo-output"), help="work folder")
    add_schemas_option(demo)
    demo.add_argument("--threshold", type=float, default=None, help="clustering distance cut")
    demo.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from lexbuild.demo import run_demo

    print("lexbuild demo: parsing, inducing, merging, releasing ...", file=sys.stderr)
    summary = run_demo(args.output, schemas_dir=args.schemas, threshold=args.threshold)
    sys.stdout.write(format_summary(summary))
    return EXIT_FINDINGS if summary.validation_problems else EXIT_OK


def format_summary(summary: DemoSummary) -> str:
    scores = {verb.lemma: verb for verb in summary.evaluation.verbs}
    lines = [
        f"corpus: {summary.sentences} sentences parsed, {summary.occurrences} occurrences of "
        f"{len(summary.senses_per_verb)} verbs",
        "",
        "verb          senses after merge  induced  gold  B-cubed F1    ARI  V-measure",
    ]
    for lemma, count in sorted(summary.senses_per_verb.items()):
        verb = scores.get(lemma)
        scored = (
            f"{verb.induced_senses:>7}  {verb.gold_senses:>4}  {verb.bcubed_f1:>10.3f}  "
            f"{verb.ari:>5.3f}  {verb.v_measure:>9.3f}"
            if verb
            else f"{'-':>7}  {'-':>4}  {'-':>10}  {'-':>5}  {'-':>9}"
        )
        lines.append(f"{lemma:<13} {count:>18}  {scored}")
    macro = summary.evaluation.macro
    blind = summary.unguided.macro
    lines += [
        "",
        "mean over verbs    guided  unguided",
        *(f"  {name:<16}{value:>6.3f}  {blind.get(name, float('nan')):>8.3f}"
          for name, value in macro.items()),
        f"guided by {len(summary.guided.get('curated', {}))} curated senses; "
        f"{len(summary.guided.get('unsupported', []))} without support in the corpus",
        f"merge: {len(summary.merge.matched)} senses matched, {len(summary.merge.senses_added)} "
        f"added, {len(summary.merge.entries_added)} entries added, "
        f"{len(summary.merge.unsupported)} flagged as unsupported",
        f"merged dictionary: {summary.entries} entries, {summary.senses} senses, "
        f"{summary.frames} frames",
        f"validation problems in the released edition: {summary.validation_problems}",
        "",
        "artefacts:",
        *(f"  {path}" for path in summary.artefacts),
        f"  {summary.induced} (induction folder)",
        f"  {summary.sources} (merged sources)",
    ]
    return "\n".join(lines) + "\n"
