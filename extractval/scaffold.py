"""``extractval new STUDY-ID``: a new study folder from the templates in ``extractval/scaffold/``.

The folder gets a commented study.yaml, an empty runs table with the contract's headers and a
short guide to the columns, so nobody has to guess the format. An existing folder is never
touched.
"""

from __future__ import annotations

import sys
from importlib import resources
from pathlib import Path

#: template file -> name in the new study folder
FILES = {"study.yaml": "study.yaml", "runs.csv": "runs.csv", "README.txt": "README-runs.txt"}
PLACEHOLDER = "{study_id}"


def template(name: str) -> str:
    return (resources.files("extractval") / "scaffold" / name).read_text(encoding="utf-8")


def new_study(study_id: str, studies_dir: Path) -> Path:
    """Create ``studies_dir/study_id`` from the templates; raise ValueError with the reason."""
    from .study import STUDY_ID

    if not STUDY_ID.match(study_id):
        raise ValueError(f"study id {study_id!r}: expected ASCII letters, digits, '-' and '_' "
                         "only, e.g. HPA-2026-014 (the id becomes part of every number's "
                         "identifier and of the page's address)")
    studies_dir = Path(studies_dir)
    if studies_dir.exists() and not studies_dir.is_dir():
        raise ValueError(f"{studies_dir}: exists and is not a folder; expected the folder "
                         "that holds the study folders")
    folder = studies_dir / study_id
    if folder.exists():
        raise ValueError(f"{folder}: already exists; nothing was changed (choose a new id, or "
                         "edit the study that is there)")
    texts = {target: template(source).replace(PLACEHOLDER, study_id)
             for source, target in FILES.items()}
    folder.mkdir(parents=True)
    for target, text in texts.items():
        (folder / target).write_text(text, encoding="utf-8", newline="\n")
    return folder


def new_command(args) -> int:
    studies = Path(getattr(args, "studies", None) or "studies")
    try:
        folder = new_study(args.study_id, studies)
    except (ValueError, OSError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    print(f"created {folder}: fill in study.yaml and runs.csv (see README-runs.txt), then run "
          f"`extractval check {folder}`")
    return 0
