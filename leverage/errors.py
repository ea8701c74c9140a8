"""The errors a user sees: one line each, never a traceback.

``ProblemError``: bad input in a problem file, on the command line, or in a result
folder's files (file, key, value and what is allowed). ``WriteFault``: the machine
would not take a file (disk full, a read-only or missing folder); it names the path
and the free space there. Every message is one printable line: control characters
are escaped and a long value is cut (``printable``, ``shown_value``).
"""

import shutil
from pathlib import Path

MAX_VALUE_CHARS = 80  # a value shown in a message is cut to this many characters
MAX_MESSAGE_CHARS = 600  # and a whole message to this many


def printable(text, limit: int | None = None) -> str:
    """``text`` with every control character (C0, DEL, C1, and the Unicode line and
    bidirectional controls) written as ``\\xNN``/``\\uNNNN`` and, with ``limit``, cut to
    about that many characters with the number of characters left off."""
    text = str(text)
    out = []
    for ch in text:
        code = ord(ch)
        if code < 0x20 or 0x7F <= code < 0xA0:
            out.append(f"\\x{code:02x}")
        elif code in (0x2028, 0x2029) or 0x202A <= code <= 0x202E or 0x2066 <= code <= 0x2069:
            out.append(f"\\u{code:04x}")
        else:
            out.append(ch)
    clean = "".join(out)
    if limit is not None and len(clean) > limit:
        clean = f"{clean[:limit]}... ({len(text):,} characters in all)"
    return clean


def shown_value(value) -> str:
    """A value as a message shows it: its repr, at most ``MAX_VALUE_CHARS`` characters."""
    if isinstance(value, str) and len(value) > MAX_VALUE_CHARS:
        # No repr of a megabyte just to cut it; say how long the value really is.
        return (
            f"{printable(repr(value[:MAX_VALUE_CHARS]))[:MAX_VALUE_CHARS]}... "
            f"({len(value):,} characters in all)"
        )
    try:
        text = repr(value)
    except RecursionError:
        return "<nested too deeply to show>"
    return printable(text, MAX_VALUE_CHARS)


class ProblemError(Exception):
    """Bad input in a problem file or on the command line; str() is one line."""

    def __init__(self, source: str, key: str, value, reason: str):
        self.source = source
        self.key = key
        self.value = value
        self.reason = reason
        where = (
            f"{printable(source, 200)}: {printable(key, 200)}" if key else printable(source, 200)
        )
        shown = "" if value is _NO_VALUE else f" = {shown_value(value)}"
        super().__init__(f"{where}{shown}: {printable(reason, MAX_MESSAGE_CHARS)}")


def free_space(path) -> str:
    """Free space on the file system holding ``path`` (or its nearest existing parent)
    as text, e.g. "1.2 GB free"; "free space unknown" when it cannot be measured."""
    p = Path(path).absolute()
    while not p.exists() and p != p.parent:
        p = p.parent
    try:
        free = shutil.disk_usage(p).free
    except OSError:
        return "free space unknown"
    for unit, size in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if free >= size:
            return f"{free / size:.1f} {unit} free"
    return f"{free} bytes free"


class WriteFault(Exception):
    """A file or folder could not be written: the path, the reason, the free space there,
    and what was kept (``note``). str() is one line."""

    def __init__(self, path, reason, note: str = ""):
        self.path = str(path)
        self.reason = (
            reason.strerror if isinstance(reason, OSError) and reason.strerror else str(reason)
        )
        self.note = note
        text = (
            f"cannot write {printable(self.path, 200)} ({printable(self.reason, 200)}; "
            f"{free_space(path)})"
        )
        if note:
            text += f"; {printable(note, MAX_MESSAGE_CHARS)}"
        super().__init__(text)


class _NoValue:
    def __repr__(self):
        return "<none>"


_NO_VALUE = _NoValue()
NO_VALUE = _NO_VALUE
