"""Files of a result folder: atomic writes and reading the design record back.

Files are written atomically: to a temporary name in the same folder, fsync'd, then
renamed, so a crash or Ctrl-C leaves the old file or the new one, never a partial one.
"""
import json
import os
import tempfile
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError

_UMASK = os.umask(0o022)
os.umask(_UMASK)  # read without changing it


def write_bytes_atomic(path, data: bytes, sync: bool = True) -> None:
    """Write bytes to path via a temporary file in the same folder and a rename.

    The file is fsync'd first when ``sync`` (a crash then leaves the old file or the
    new one, never a partial one). It gets the usual permissions (0666 less the
    umask), not mkstemp's owner-only 0600.
    """
    path = Path(path)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            if sync:
                os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_UMASK)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_atomic(path, text: str) -> None:
    """Write text (UTF-8) to path atomically; see ``write_bytes_atomic``."""
    write_bytes_atomic(path, text.encode("utf-8"))


def write_json(path, data: dict) -> None:
    write_atomic(path, json.dumps(data, indent=2, allow_nan=False) + "\n")


def read_json(path) -> dict:
    return json.loads(Path(path).read_text(encoding="utf-8"))


def load_record(folder) -> dict:
    path = Path(folder) / "best.json"
    if not path.is_file():
        raise ProblemError(str(folder), "", NO_VALUE, "no best.json here: not a result folder")
    try:
        return read_json(path)
    except ValueError as exc:
        raise ProblemError(str(path), "", NO_VALUE, f"unreadable JSON ({exc})") from None


