"""CCSDS Orbit Ephemeris Message (OEM), KVN form: a writer and a small reader.

Layout written (CCSDS 502.0-B-2, Orbit Data Messages, section 5: header, then per
segment a metadata block between META_START and META_STOP followed by data lines
"epoch x y z x_dot y_dot z_dot" in km and km/s):

    CCSDS_OEM_VERS = 2.0
    COMMENT ...
    CREATION_DATE = <UTC>
    ORIGINATOR = ...
    META_START
    COMMENT ...
    OBJECT_NAME, OBJECT_ID, CENTER_NAME, REF_FRAME, TIME_SYSTEM, START_TIME, STOP_TIME
    META_STOP
    <data lines>

Optional keywords (REF_FRAME_EPOCH, USEABLE_START/STOP_TIME, INTERPOLATION,
INTERPOLATION_DEGREE, covariance) are not written; the reader accepts them in their
places. The keyword lists and order here are the standard's tables as recalled,
not copied from the document.
"""

import re
from dataclasses import dataclass, field

import numpy as np

HEADER_REQUIRED = ["CCSDS_OEM_VERS", "CREATION_DATE", "ORIGINATOR"]
HEADER_ORDER = ["CCSDS_OEM_VERS", "COMMENT", "CREATION_DATE", "ORIGINATOR", "MESSAGE_ID"]
META_REQUIRED = [
    "OBJECT_NAME",
    "OBJECT_ID",
    "CENTER_NAME",
    "REF_FRAME",
    "TIME_SYSTEM",
    "START_TIME",
    "STOP_TIME",
]
META_ORDER = [
    "COMMENT",
    "OBJECT_NAME",
    "OBJECT_ID",
    "CENTER_NAME",
    "REF_FRAME",
    "REF_FRAME_EPOCH",
    "TIME_SYSTEM",
    "START_TIME",
    "USEABLE_START_TIME",
    "USEABLE_STOP_TIME",
    "STOP_TIME",
    "INTERPOLATION",
    "INTERPOLATION_DEGREE",
]
EPOCH_PATTERN = re.compile(r"^\d{4}-(\d{2}-\d{2}|\d{3})T\d{2}:\d{2}:\d{2}(\.\d+)?Z?$")


@dataclass
class Segment:
    """One OEM segment: metadata in file order, comments, epochs and states.

    metadata: list of (keyword, value); epochs: strings as written; states: (n, 6)
    km and km/s in the segment's REF_FRAME and CENTER_NAME.
    """

    metadata: list
    epochs: list
    states: np.ndarray
    comments: list = field(default_factory=list)

    def meta(self, key: str) -> str:
        return dict(self.metadata)[key]


@dataclass
class Message:
    header: list
    segments: list


def format_epoch(text: str) -> str:
    """An ISO epoch 'YYYY-MM-DDThh:mm:ss.ffffff' (no time zone letter)."""
    if not EPOCH_PATTERN.match(text):
        raise ValueError(f"not an OEM epoch: {text!r}")
    return text.rstrip("Z")


def write(header: list, segments: list) -> str:
    """KVN text of an OEM. header: (keyword, value) pairs in order (COMMENT allowed)."""
    lines = []
    for key, value in header:
        lines.append(f"COMMENT {value}" if key == "COMMENT" else f"{key} = {value}")
    for seg in segments:
        lines += ["", "META_START"]
        lines += [f"COMMENT {c}" for c in seg.comments]
        lines += [f"{key} = {value}" for key, value in seg.metadata]
        lines += ["META_STOP", ""]
        for epoch, state in zip(seg.epochs, seg.states):
            lines.append(
                f"{format_epoch(epoch)} "
                + " ".join([f"{v:.6f}" for v in state[:3]] + [f"{v:.9f}" for v in state[3:6]])
            )
    return "\n".join(lines) + "\n"


def _key_value(line: str, where: str):
    if "=" not in line:
        raise ValueError(f"{where}: expected 'KEYWORD = value', got {line!r}")
    key, value = line.split("=", 1)
    return key.strip(), value.strip()


def _check_order(keys, order, required, where):
    missing = [k for k in required if k not in keys]
    if missing:
        raise ValueError(f"{where}: missing required keyword {missing[0]}")
    unknown = [k for k in keys if k not in order]
    if unknown:
        raise ValueError(f"{where}: keyword {unknown[0]} not allowed here")
    plain = [k for k in keys if k != "COMMENT"]
    if len(set(plain)) != len(plain):
        raise ValueError(f"{where}: a keyword appears twice")
    ranks = [order.index(k) for k in keys]
    if ranks != sorted(ranks):
        raise ValueError(f"{where}: keywords out of order: {keys}")


def read(text: str) -> Message:
    """Parse and check an OEM in KVN form; ValueError says what is wrong and where.

    Checks: the header starts with CCSDS_OEM_VERS and has the required keywords in
    order; each segment's metadata has the required keywords in order; data lines
    have an epoch and 6 (or 9, with accelerations) numbers; epochs increase and lie
    within START_TIME..STOP_TIME (compared as ISO strings of one format).
    """
    lines = [ln.strip() for ln in text.splitlines()]
    lines = [ln for ln in lines if ln]
    if not lines or not lines[0].startswith("CCSDS_OEM_VERS"):
        raise ValueError("an OEM must start with CCSDS_OEM_VERS")
    header, k = [], 0
    while k < len(lines) and lines[k] != "META_START":
        line = lines[k]
        header.append(
            ("COMMENT", line[7:].strip())
            if line.startswith("COMMENT")
            else _key_value(line, f"header line {k + 1}")
        )
        k += 1
    _check_order([h[0] for h in header], HEADER_ORDER, HEADER_REQUIRED, "header")
    segments = []
    while k < len(lines):
        if lines[k] != "META_START":
            raise ValueError(f"expected META_START, got {lines[k]!r}")
        k += 1
        meta, comments, keys = [], [], []
        while k < len(lines) and lines[k] != "META_STOP":
            line = lines[k]
            if line.startswith("COMMENT"):
                if meta:
                    raise ValueError("metadata COMMENT lines must come first")
                comments.append(line[7:].strip())
                keys.append("COMMENT")
            else:
                key, value = _key_value(line, f"segment {len(segments) + 1} metadata")
                meta.append((key, value))
                keys.append(key)
            k += 1
        if k == len(lines):
            raise ValueError("META_START without META_STOP")
        where = f"segment {len(segments) + 1} metadata"
        _check_order(keys, META_ORDER, META_REQUIRED, where)
        k += 1
        epochs, states = [], []
        while k < len(lines) and lines[k] != "META_START":
            line = lines[k]
            k += 1
            if line.startswith("COMMENT"):
                if epochs:
                    raise ValueError("data COMMENT lines must come before the first state")
                continue
            parts = line.split()
            if len(parts) not in (7, 10) or not EPOCH_PATTERN.match(parts[0]):
                raise ValueError(f"bad data line: {line!r}")
            epochs.append(parts[0])
            states.append([float(p) for p in parts[1:7]])
        seg = Segment(meta, epochs, np.array(states, dtype=float).reshape(-1, 6), comments)
        start, stop = seg.meta("START_TIME"), seg.meta("STOP_TIME")
        if not epochs:
            raise ValueError(f"{where}: no data lines")
        if any(b <= a for a, b in zip(epochs, epochs[1:])):
            raise ValueError(f"segment {len(segments) + 1}: epochs do not increase")
        if epochs[0] < start or epochs[-1] > stop:
            raise ValueError(f"segment {len(segments) + 1}: data outside START_TIME..STOP_TIME")
        segments.append(seg)
    if not segments:
        raise ValueError("no segments")
    return Message(header, segments)
