"""Files of a result folder: atomic writes and reading the design record back.

Files are written atomically: to a temporary name in the same folder, fsync'd, then
renamed, so a crash or Ctrl-C leaves the old file or the new one, never a partial one.
"""

import json
import math
import os
import re
import tempfile
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError, WriteFault

MAX_RECORD_BYTES = 50_000_000  # a best.json is some kB; refuse reading anything huge
MAX_FOLDER_NAME_CHARS = 80

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
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError) and exc.filename is None:  # a write: name the file
            raise OSError(exc.errno, exc.strerror or str(exc), str(path)) from exc
        raise


def write_atomic(path, text: str) -> None:
    """Write text (UTF-8) to path atomically; see ``write_bytes_atomic``."""
    write_bytes_atomic(path, text.encode("utf-8"))


def write_json(path, data: dict) -> None:
    write_atomic(path, json.dumps(data, indent=2, allow_nan=False) + "\n")


def _no_constant(name):
    raise ValueError(f"{name} is not a number JSON allows (a non-finite value)")


def _finite_float(text):
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"{text} is out of range for a float")
    return value


def read_json(path) -> dict:
    """A JSON file as written by ``write_json``: NaN, Infinity and overflowing numbers are
    refused (ValueError), and so is nesting too deep to read (RecursionError)."""
    return json.loads(
        Path(path).read_text(encoding="utf-8"),
        parse_constant=_no_constant,
        parse_float=_finite_float,
    )


def load_refined(folder) -> dict | None:
    """The ``refined/refined.json`` of a result folder (``leverage refine``), or None."""
    path = Path(folder) / "refined" / "refined.json"
    try:
        return read_json(path) if path.is_file() else None
    except (OSError, ValueError):
        return None


def load_record(folder) -> dict:
    """The design record of a result folder; a one-line ProblemError for anything that is
    not a readable, finite, reasonably sized JSON object."""
    path = Path(folder) / "best.json"
    if not path.is_file():
        raise ProblemError(str(folder), "", NO_VALUE, "no best.json here: not a result folder")
    try:
        if path.stat().st_size > MAX_RECORD_BYTES:
            raise ProblemError(
                str(path),
                "",
                NO_VALUE,
                f"larger than {MAX_RECORD_BYTES:,} bytes: not a design record",
            )
        record = read_json(path)
    except RecursionError:
        raise ProblemError(str(path), "", NO_VALUE, "unreadable JSON (nested too deeply)") from None
    except (ValueError, OSError) as exc:
        raise ProblemError(str(path), "", NO_VALUE, f"unreadable JSON ({exc})") from None
    if not isinstance(record, dict):
        raise ProblemError(
            str(path),
            "",
            NO_VALUE,
            f"not a design record (a JSON {type(record).__name__}, not an object)",
        )
    return record


def safe_folder_name(name: str) -> str:
    """A folder name made from a study name: only letters, digits, ``.``, ``_`` and ``-``
    (anything else, path separators and control characters included, becomes ``-``), no
    leading dot (so never ``.`` or ``..``), at most ``MAX_FOLDER_NAME_CHARS`` characters;
    "study" when nothing is left."""
    clean = re.sub(r"[^\w.-]+", "-", str(name))
    clean = clean.lstrip(".-")[:MAX_FOLDER_NAME_CHARS].rstrip(".-")
    return clean or "study"


def check_writable(folder, create: bool = True) -> Path:
    """Make sure files can be written in ``folder`` before any work is done: the folder
    (created with its parents when ``create``) takes a small probe file, which is
    removed again. Returns the folder; ``ProblemError`` when a path component is a file,
    ``WriteFault`` (path, reason, free space) when the system refuses."""
    folder = Path(folder)
    for parent in [folder, *folder.parents]:
        if parent.exists():
            if not parent.is_dir():
                raise ProblemError(
                    str(folder),
                    "",
                    NO_VALUE,
                    "is a file, not a folder"
                    if parent == folder
                    else f"lies below {parent}, which is a file, not a folder",
                )
            break
    try:
        if create:
            folder.mkdir(parents=True, exist_ok=True)
        elif not folder.is_dir():
            raise ProblemError(str(folder), "", NO_VALUE, "no such folder")
        fd, probe = tempfile.mkstemp(dir=folder, prefix=".leverage-probe.")
        try:
            os.write(fd, b"probe")
        finally:
            os.close(fd)
            os.unlink(probe)
    except OSError as exc:
        raise WriteFault(
            exc.filename or folder, exc, "nothing was done; pick a folder that can be written"
        ) from None
    return folder
