"""Writing a run's results when the disk is full or the folder stops taking files.

``write_results`` writes best.json (first: it is the design) and summary.txt into the
run folder. When that fails, or when the search itself was stopped by a write fault
(``fault``), the best design found so far is still written if it can be: to the run
folder, else to a file in the system's temporary folder, and the ``WriteFault`` that
follows names the path that failed, the free space there, and where the design is.
The checkpoint is written atomically, so the last whole one stays and ``--resume``
continues from it once there is room.
"""

import json
import os
import tempfile
from pathlib import Path

from leverage.errors import WriteFault
from leverage.fileio import safe_folder_name, write_atomic, write_json


def write_results(out_dir: Path, record: dict, text: str, fault: OSError | None = None) -> None:
    """best.json and summary.txt into ``out_dir``; WriteFault (one line) when anything
    could not be written, after keeping the design wherever possible."""
    out_dir = Path(out_dir)
    kept = None
    try:
        write_json(out_dir / "best.json", record)
        kept = out_dir / "best.json"
        write_atomic(out_dir / "summary.txt", text)
    except OSError as exc:
        fault = fault or exc
    if fault is None:
        return
    if kept is None:
        kept = _elsewhere(record)
    failed = getattr(fault, "filename", None) or out_dir
    where = (
        f"the best design so far is in {kept}"
        if kept is not None
        else "the best design so far could not be written anywhere"
    )
    raise WriteFault(
        failed,
        fault,
        f"{where}; free space and continue with: leverage run PROBLEM --resume {out_dir}",
    )


def _elsewhere(record: dict) -> Path | None:
    """Write the record to the system's temporary folder; its path, or None."""
    name = safe_folder_name(record.get("problem", {}).get("name", "run"))
    try:
        fd, path = tempfile.mkstemp(prefix=f"leverage-{name}-", suffix="-best.json")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(json.dumps(record, indent=2, allow_nan=False) + "\n")
        return Path(path)
    except (OSError, ValueError):
        return None
