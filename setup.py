"""Build hook: the wheel carries copies of ``sample_lexicon/`` and the JSON Schemas.

Everything else is declared in pyproject.toml. The sample dictionary and ``schemas/*.json`` live
at the top of the repository (editors and tests use them there); ``lexbuild demo`` run from an
installed wheel needs them inside the package, so the build copies them to
``lexbuild/data/sample_lexicon/`` and ``lexbuild/data/json_schemas/`` (never into the source tree).
"""

from __future__ import annotations

import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

ROOT = Path(__file__).resolve().parent


class BuildWithSampleData(build_py):
    def run(self) -> None:
        super().run()
        if getattr(self, "editable_mode", False):  # an editable install reads the checkout
            return
        data = Path(self.build_lib) / "lexbuild" / "data"
        shutil.copytree(ROOT / "sample_lexicon", data / "sample_lexicon", dirs_exist_ok=True)
        schemas = data / "json_schemas"
        schemas.mkdir(parents=True, exist_ok=True)
        for path in sorted((ROOT / "schemas").glob("*.schema.json")):
            shutil.copy2(path, schemas / path.name)


setup(cmdclass={"build_py": BuildWithSampleData})
