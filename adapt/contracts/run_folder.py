"""The pretrain run folder: ``metrics.jsonl`` (one JSON object per line) and where its parts live."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from adapt.common.io import now_utc, to_jsonable


class MetricsLog:
    """Append-only ``metrics.jsonl``: one JSON object per line, flushed at once."""

    def __init__(self, path: Path | str):
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)

    def write(self, **record: Any) -> None:
        record = {"time": now_utc(), **to_jsonable(record)}
        with open(self.path, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(record, ensure_ascii=False) + "\n")
            fh.flush()

    def read(self) -> list[dict[str, Any]]:
        if not self.path.exists():
            return []
        return [json.loads(line) for line in self.path.read_text(encoding="utf-8").splitlines() if line.strip()]
