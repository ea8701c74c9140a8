"""What a new user reads after an interrupted run and in a summary (issue 13)."""

import copy

from leverage.cli.run import exit_code
from leverage.reports.summary import render
from leverage.run.runner import RunOutcome


def test_an_interrupted_run_says_how_to_continue(tmp_path, capsys):
    (tmp_path / "checkpoint.pickle").write_bytes(b"")
    assert (
        exit_code(RunOutcome(tmp_path, "interrupted", {"feasible": False}), "problems/my demo.toml")
        == 130
    )
    err = capsys.readouterr().err.splitlines()
    assert err == [
        f"leverage: interrupted; the best design so far is in best.json; "
        f"continue with: leverage run 'problems/my demo.toml' --resume {tmp_path}"
    ]


def test_an_interrupted_run_without_a_checkpoint_does_not_offer_resume(tmp_path, capsys):
    assert exit_code(RunOutcome(tmp_path, "not started", None), "demo.toml") == 130
    (line,) = capsys.readouterr().err.splitlines()
    assert "nothing written" in line and "--resume" not in line


def test_one_revolution_is_singular(demo_result):
    import json

    record = json.loads((demo_result / "best.json").read_text())
    for revs, words in ((1.0, "1 revolution,"), (0.0, "0 revolutions,"), (2.0, "2 revolutions,")):
        changed = copy.deepcopy(record)
        changed["derived"]["lambert_revolutions"]["value"] = revs
        assert f"Lambert arc: {words}" in render(changed)
