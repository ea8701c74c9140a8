"""Hostile input and faults (issue 16): one line, nothing lost, nothing silently wrong,
nothing written outside the result folder.

Each test injects one fault and checks the project's promise (README "Exit codes"):
one line on stderr naming the file, key or path (values cut to ~80 characters), the
documented exit code, no traceback, and the files already written kept.

How the faults are made:
- disk full: ``RLIMIT_FSIZE`` (what ``ulimit -f`` sets) in a subprocess, from the start
  (``preexec_fn``) or lowered mid-search by a small driver script; writing past it fails
  with EFBIG, as a full disk fails with ENOSPC (both are the same ``OSError`` path);
- read-only folder: a read-only bind mount when this process may mount (root with
  CAP_SYS_ADMIN; chmod does not stop root), else ``tempfile.mkstemp`` monkeypatched to
  fail with EROFS (the tests say which one ran in their ``mode``);
- signals: a driver script that holds the command at one phase (search, polish,
  pictures, verification, export), prints a marker, and waits for SIGINT or SIGTERM;
- corrupted files: bytes flipped, keys removed, NaN, 1e308, deep nesting, garbage.
Problem files refused on sight are in tests/problem/bad_problems/ (test_problem.py).
"""

import errno
import json
import os
import pickle
import resource
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from leverage.cli import EXIT_BAD_INPUT, EXIT_CANNOT_WRITE, EXIT_INTERNAL, EXIT_INTERRUPTED, main
from leverage.cli.run import default_out
from leverage.run.lock import folder_lock
from leverage.search import checkpoint

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "problems" / "demo.toml"
SMALL = ["--workers", "1", "--generations", "100", "--quiet"]
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}


def one_line(capsys, code_expected=None) -> str:
    out, err = capsys.readouterr()
    assert "Traceback" not in err + out
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("leverage: ")
    assert len(lines[0]) < 700
    return lines[0]


@pytest.fixture
def result(demo_result, tmp_path) -> Path:
    """A private copy of the session's demo result folder, free to damage."""
    folder = tmp_path / "result"
    shutil.copytree(demo_result, folder)
    return folder


# ---------------------------------------------------------------- where results go


@pytest.mark.parametrize(
    "name", ["../../escaped", "/tmp/x/run", "a\x00b", "n" * 300, "..", "\x1b[31mred"]
)
def test_default_folder_stays_in_results(name):
    out = default_out(name)
    assert out.parent == Path("results")
    assert "/" not in out.name and "\\" not in out.name and not out.name.startswith(".")
    assert all(ch.isprintable() for ch in out.name) and len(out.name) <= 100


@pytest.mark.parametrize(
    "out, code, fragment",
    [
        ("/proc/leverage-test/run", EXIT_CANNOT_WRITE, "cannot write /proc/leverage-test"),
        ("{file}/run", EXIT_BAD_INPUT, "which is a file, not a folder"),
    ],
)
def test_unusable_out_is_one_line_before_any_work(out, code, fragment, tmp_path, capsys):
    (tmp_path / "file").write_text("x")
    out = out.format(file=tmp_path / "file")
    assert main(["run", str(DEMO), "--out", out, *SMALL]) == code
    assert fragment in one_line(capsys)


class ReadOnly:
    """Make a folder read-only: a read-only bind mount if possible, else mkstemp patched."""

    def __init__(self, folder, monkeypatch):
        self.folder = str(folder)
        ok = (
            subprocess.run(
                ["mount", "--bind", "-o", "ro", self.folder, self.folder], capture_output=True
            ).returncode
            == 0
        )
        self.mode = "bind mount" if ok else "monkeypatch"
        if not ok:
            real = tempfile.mkstemp

            def refuse(*args, dir=None, **kw):
                if dir is not None and str(dir).startswith(self.folder):
                    raise OSError(errno.EROFS, os.strerror(errno.EROFS), str(dir))
                return real(*args, dir=dir, **kw)

            monkeypatch.setattr(tempfile, "mkstemp", refuse)

    def undo(self):
        if self.mode == "bind mount":
            subprocess.run(["umount", self.folder], check=True)


@pytest.mark.parametrize(
    "command", [["plot"], ["verify"], ["export", "--format", "csv"], ["run", str(DEMO), "--resume"]]
)
def test_read_only_result_folder_is_one_line_before_any_work(command, result, monkeypatch, capsys):
    import leverage.verify.report as verify_report  # leverage verify imports it in main

    monkeypatch.setattr(
        verify_report,
        "verify_record",
        lambda *a, **k: pytest.fail("verified before checking the folder"),
    )
    before = sorted(p.name for p in result.iterdir())
    ro = ReadOnly(result, monkeypatch)
    try:
        assert main([*command, str(result)]) == EXIT_CANNOT_WRITE, ro.mode
        line = one_line(capsys)
    finally:
        ro.undo()
    assert f"cannot write {result}" in line and "free" in line, (ro.mode, line)
    assert sorted(p.name for p in result.iterdir()) == before


def test_out_in_read_only_folder(tmp_path, monkeypatch, capsys):
    parent = tmp_path / "ro"
    parent.mkdir()
    ro = ReadOnly(parent, monkeypatch)
    try:
        code = main(["run", str(DEMO), "--out", str(parent / "run"), *SMALL])
        line = one_line(capsys)
    finally:
        ro.undo()
    assert code == EXIT_CANNOT_WRITE and "cannot write" in line, (ro.mode, line)


# ---------------------------------------------------------------- locking


def test_second_writer_into_a_locked_folder_is_refused(result, capsys):
    with folder_lock(result):
        for command in (
            ["run", str(DEMO), "--out", str(result), "--force", *SMALL],
            ["plot", str(result)],
        ):
            assert main(command) == EXIT_BAD_INPUT
            line = one_line(capsys)
            assert "in use by another leverage process" in line and str(os.getpid()) in line
    assert (result / "best.json").is_file()


# ---------------------------------------------------------------- damaged files


def test_checkpoint_with_flipped_bytes_is_refused(result, capsys):
    path = result / checkpoint.FILE_NAME
    data = bytearray(path.read_bytes())
    for k in range(16):
        data[len(data) // 2 + 97 * k] ^= 0xFF
    path.write_bytes(bytes(data))
    assert main(["run", str(DEMO), "--resume", str(result), *SMALL]) == EXIT_BAD_INPUT
    assert "damaged checkpoint" in one_line(capsys)


def test_checkpoint_with_missing_keys_is_refused(result, capsys):
    path = result / checkpoint.FILE_NAME
    data = checkpoint.load(result)
    del data["settings"]["seed"], data["elapsed_s"]
    path.write_bytes(checkpoint.encode(data))  # right tag and checksum, keys missing
    assert main(["run", str(DEMO), "--resume", str(result), *SMALL]) == EXIT_BAD_INPUT
    assert "elapsed_s: missing" in one_line(capsys)
    path.write_bytes(pickle.dumps({"format": checkpoint.FORMAT}))  # no header at all
    assert main(["run", str(DEMO), "--resume", str(result), *SMALL]) == EXIT_BAD_INPUT
    assert "no header with a checksum" in one_line(capsys)


def _nested(depth):
    return "[" * depth + "]" * depth


@pytest.mark.parametrize(
    "damage, fragment",
    [
        ("nan", "non-finite"),
        ("huge", "not a state of a design"),
        ("deep", "nested too deeply"),
        ("list", "not a design record"),
    ],
)
@pytest.mark.parametrize("command", [["plot"], ["verify"], ["export", "--format", "oem"], ["show"]])
def test_damaged_best_json_is_one_line(damage, fragment, command, result, capsys):
    path = result / "best.json"
    record = json.loads(path.read_text())
    if damage == "nan":
        text = path.read_text().replace(json.dumps(record["events"][0]["position_km"][0]), "NaN", 1)
    elif damage == "huge":
        record["events"][0]["position_km"] = [1e308, 1e308, 1e308]
        text = json.dumps(record)
    elif damage == "deep":
        text = '{"a": ' + _nested(100_000) + "}"
    else:
        text = "[1, 2]"
    path.write_text(text)
    code = main([*command, str(result)])
    if command == ["show"] and damage == "huge":  # a summary shows the number as it is
        assert code == 0 and "Traceback" not in capsys.readouterr().err
        return
    line = one_line(capsys)
    assert code == EXIT_BAD_INPUT and fragment in line, line


def test_garbled_convergence_log_is_one_line(result, capsys):
    (result / "convergence.csv").write_bytes(b"island,evaluations\n\x00\x01garbage,\xff,1,2,3\n")
    assert main(["plot", str(result)]) == EXIT_BAD_INPUT
    assert "convergence.csv" in one_line(capsys)


def test_debug_shows_the_traceback_and_bugs_are_one_line(result, monkeypatch, capsys):
    import leverage.cli.show as show

    monkeypatch.setattr(show, "render", lambda record: 1 / 0)
    monkeypatch.setattr(show, "load_record", lambda folder: {})
    assert main(["show", str(result)]) == EXIT_INTERNAL
    assert "internal error (ZeroDivisionError" in one_line(capsys)
    assert main(["--debug", "show", str(result)]) == EXIT_INTERNAL
    assert "Traceback" in capsys.readouterr().err


def test_printed_control_characters_are_escaped(result, capsys):
    record = json.loads((result / "best.json").read_text())
    record["problem"]["name"] = "evil\x1b]0;title\x07\x1b[2J"
    (result / "best.json").write_text(json.dumps(record))
    main(["show", str(result)])
    out, err = capsys.readouterr()
    assert "\x1b" not in out + err and "\x07" not in out + err
    assert "\\x1b" in out


# ---------------------------------------------------------------- disk full (subprocesses)


def _limit(nbytes):
    def set_limit():
        resource.setrlimit(resource.RLIMIT_FSIZE, (nbytes, resource.RLIM_INFINITY))

    return set_limit


def _png_whole(path: Path) -> bool:
    return path.read_bytes().endswith(b"IEND\xaeB`\x82")


def test_disk_full_during_pictures_keeps_the_design_and_no_partial_png(tmp_path):
    out = tmp_path / "run"
    driver = tmp_path / "fill.py"
    driver.write_text(FILL_AT_PICTURES.format(root=str(ROOT)))
    proc = subprocess.run(
        [sys.executable, str(driver), "run", str(DEMO), "--out", str(out), *SMALL],
        env=ENV,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == EXIT_CANNOT_WRITE, proc.stderr
    assert "Traceback" not in proc.stderr
    last = proc.stderr.strip().splitlines()[-1]
    assert last.startswith("leverage: cannot write ") and ".png" in last and "free" in last
    assert "leverage plot" in last
    assert json.loads((out / "best.json").read_text())["status"] == "complete"
    assert all(_png_whole(p) for p in out.glob("*.png"))
    assert not list(out.glob(".*.tmp"))


DRIVER_HEAD = """
import os, resource, signal, sys, time
sys.path.insert(0, {root!r})
from leverage.cli import main
"""

FILL_AT_PICTURES = (
    DRIVER_HEAD
    + """
from leverage.run import afterrun
real = afterrun.pictures_and_verification
def pictures_and_verification(*args, **kwargs):
    # the disk fills once the search's files are written: a PNG is the first casualty
    resource.setrlimit(resource.RLIMIT_FSIZE, (100_000, resource.RLIM_INFINITY))
    return real(*args, **kwargs)
afterrun.pictures_and_verification = pictures_and_verification
sys.exit(main(sys.argv[1:]))
"""
)


FILL_MID_SEARCH = (
    DRIVER_HEAD
    + """
from leverage.search import checkpoint
checkpoint.WRITE_EVERY_S = 0.0  # a checkpoint after every evolution, as this scenario needs
real = checkpoint.Checkpointer.save
count = [0]
def save(self, search, final=False):
    count[0] += 1
    if count[0] == 3:  # the disk fills after two whole checkpoints
        resource.setrlimit(resource.RLIMIT_FSIZE, (20_000, resource.RLIM_INFINITY))
    return real(self, search, final)
checkpoint.Checkpointer.save = save
sys.exit(main(sys.argv[1:]))
"""
)


def test_disk_full_during_the_search_writes_the_best_design_and_resumes(tmp_path):
    out = tmp_path / "run"
    driver = tmp_path / "fill.py"
    driver.write_text(FILL_MID_SEARCH.format(root=str(ROOT)))
    # 4 evolutions of the demo's 500 generations: the disk fills at the third
    args = [str(DEMO), "--out", str(out), "--workers", "1", "--generations", "2000", "--quiet"]
    proc = subprocess.run(
        [sys.executable, str(driver), "run", *args],
        env=ENV,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == EXIT_CANNOT_WRITE, proc.stderr
    assert "Traceback" not in proc.stderr
    last = proc.stderr.strip().splitlines()[-1]
    assert f"cannot write {out}" in last and "free" in last and "--resume" in last
    record = json.loads((out / "best.json").read_text())
    assert record["status"] == "interrupted"
    assert checkpoint.load(out)["state"].evolution == 2
    proc = subprocess.run(
        [sys.executable, "-m", "leverage", "run", str(DEMO), "--resume", str(out), "--quiet"],
        env=ENV,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode in (0, 3), proc.stderr
    record = json.loads((out / "best.json").read_text())
    assert record["status"] == "complete" and record["run"]["resumed_from_evolution"] == 2


# ---------------------------------------------------------------- signals at every phase

HOLD_AT = (
    DRIVER_HEAD
    + """
phase = os.environ["HOLD_PHASE"]
def hold(real):
    def held(*args, **kwargs):
        print("HOLDING " + phase, file=sys.__stderr__, flush=True)
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline:
            time.sleep(0.05)
        return real(*args, **kwargs)
    return held
if phase == "polish":
    from leverage.search.single import Search
    Search.polish = hold(Search.polish)
elif phase == "pictures":
    from leverage.reports import plots
    plots.all_pictures = hold(plots.all_pictures)
elif phase == "verification":
    from leverage.verify import report
    report.verify_record = hold(report.verify_record)
elif phase == "export":
    import leverage.reports.export as ex  # leverage export imports it in main
    ex.export = hold(ex.export)
sys.exit(main(sys.argv[1:]))
"""
)


@pytest.mark.parametrize(
    "phase, sig",
    [
        ("search", signal.SIGTERM),
        ("polish", signal.SIGTERM),
        ("pictures", signal.SIGTERM),
        ("pictures", signal.SIGINT),
        ("verification", signal.SIGTERM),
        ("verification", signal.SIGINT),
        ("export", signal.SIGTERM),
    ],
)
def test_signal_at_every_phase_is_exit_130_and_one_line(phase, sig, demo_result, tmp_path):
    driver = tmp_path / "hold.py"
    driver.write_text(HOLD_AT.format(root=str(ROOT)))
    out = tmp_path / "run"
    if phase == "export":
        shutil.copytree(demo_result, out)
        argv = ["export", str(out), "--format", "csv"]
    else:
        gens = "100000" if phase == "search" else "100"
        argv = ["run", str(DEMO), "--out", str(out), "--workers", "1", "--generations", gens]
    proc = subprocess.Popen(
        [sys.executable, str(driver), *argv],
        env={**ENV, "HOLD_PHASE": phase},
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    marker = "evolution 2/" if phase == "search" else f"HOLDING {phase}"
    seen = []
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        line = proc.stderr.readline()
        seen.append(line)
        if marker in line or not line:
            break
    assert marker in seen[-1], "".join(seen)
    proc.send_signal(sig)
    stdout, rest = proc.communicate(timeout=60)
    err = "".join(seen) + rest
    assert proc.returncode == EXIT_INTERRUPTED, err
    assert "Traceback" not in err
    last = err.strip().splitlines()[-1]
    assert "interrupted" in last and last.count("\n") == 0
    if phase in ("pictures", "verification"):
        assert last.startswith(
            f"leverage: interrupted ({signal.Signals(sig).name}): during the {phase}"
        )
        assert json.loads((out / "best.json").read_text())["status"] == "complete"
    if phase in ("search", "polish"):
        assert json.loads((out / "best.json").read_text())["status"] == "interrupted"
    if phase == "export":
        assert last == f"leverage: interrupted ({signal.Signals(sig).name})"
        assert not list(out.glob("states.csv"))
