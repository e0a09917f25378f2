"""The generator's phrase tables and name lists, kept as JSON files under ``data/``.

Each file maps a table name (the constant the code uses, e.g. ``FACTS``) to a list or dict of
strings.  Tuples are stored as lists and sets as sorted lists; the modules that need a set build
one (``set(...)``) when they load it.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

DATA_DIR = Path(__file__).resolve().parent / "data"


def tables(name: str, names: str) -> tuple[Any, ...]:
    """The tables ``names`` (space-separated, in that order) of ``data/<name>.json``.

    Every table of the file must be asked for, so a table renamed on one side only fails here.
    """
    path = DATA_DIR / f"{name}.json"
    data = json.loads(path.read_text(encoding="utf-8"))
    wanted = names.split()
    missing = [n for n in wanted if n not in data]
    unused = [n for n in data if n not in wanted]
    if missing or unused:
        raise KeyError(f"{path}: tables missing {missing}, tables not loaded {unused}")
    return tuple(data[n] for n in wanted)
