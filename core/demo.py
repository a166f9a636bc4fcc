"""The invented demo study: a garden co-operative's members' survey, keyed twice.

``fixtures/make_demo.py`` writes the demo's files (codebook, the paper truth,
two keyed passes with planted slips); a copy ships inside the package under
``core/data/demo`` so ``keyproof demo`` works from an installed package too.
This module builds a study from that copy: the codebook, pass 1 keyed by
``AB`` and pass 2 keyed by ``JM``, imported exactly as a user would import
them.
"""

from __future__ import annotations

import shutil
from importlib import resources
from pathlib import Path

from .errors import StoreError

#: The demo study's file name inside the folder it is built in.
STUDY_NAME = "garden.sqlite"
#: Keyers of the two passes (initials, as the journal shows them).
KEYERS = {1: "AB", 2: "JM"}
#: The packaged demo files.
FILES = ("codebook.csv", "codebook.xlsx", "paper.csv", "pass1.csv", "pass2.csv", "slips.csv")


def demo_files() -> resources.abc.Traversable:
    """The folder of packaged demo files (works from an installed package, zipped or not).

    >>> (demo_files() / "pass1.csv").is_file()
    True
    """
    return resources.files("core") / "data" / "demo"


def make_demo_study(folder: str | Path) -> Path:
    """Build the demo study ``folder/garden.sqlite`` and return its path.

    The folder is created if needed; the codebook (CSV and XLSX) is copied
    beside the study so a user can look at it. Refuses (``StoreError``) when
    the study file already exists, rather than touch it.

    >>> path = make_demo_study(tmp_path)  # doctest: +SKIP
    >>> path.name  # doctest: +SKIP
    'garden.sqlite'
    """
    from .codebook_io import load_codebook
    from .importer import import_file
    from .store import Study

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    study_path = folder / STUDY_NAME
    if study_path.exists():
        raise StoreError(
            f"{study_path.name} already exists in {folder.name or folder} — "
            "choose another folder for the demo."
        )
    source = demo_files()
    with resources.as_file(source) as packaged:
        for name in ("codebook.csv", "codebook.xlsx"):
            shutil.copyfile(packaged / name, folder / name)
        codebook = load_codebook(folder / "codebook.csv")
        with Study.create(study_path, codebook, who=KEYERS[1]) as study:
            for pass_no, keyer in KEYERS.items():
                import_file(study, packaged / f"pass{pass_no}.csv", pass_no, keyer)
    return study_path
