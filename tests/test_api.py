"""The notebook interface: the README's example runs as written, errors are the command's
one line as an exception, and a solved design agrees with its own result folder.

Outside source: none beyond the README itself (the example is the contract); the design's
numbers are checked against the record the command writes for the same seed.
"""

import os
import re
import shutil
from pathlib import Path

import pytest

import leverage

ROOT = Path(__file__).resolve().parents[1]


def readme_example() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## From Python (notebooks)", 1)[1]
    return re.search(r"```python\n(.*?)```", section, re.S).group(1)


@pytest.mark.slow
def test_readme_example_runs(tmp_path, capsys):
    shutil.copytree(ROOT / "problems", tmp_path / "problems")
    here = os.getcwd()
    os.chdir(tmp_path)
    try:
        scope = {}
        exec(compile(readme_example(), "README.md", "exec"), scope)
    finally:
        os.chdir(here)
    design, same = scope["design"], scope["same"]
    assert isinstance(design, leverage.Design) and design.feasible
    assert same.record == design.record
    assert (tmp_path / "results" / "demo-notebook" / "best.json").is_file()
    printed = capsys.readouterr().out
    assert "km^2/s^2" in printed and "CAUTION" in printed
    assert design.margins["max_c3"]["unit"] == "km^2/s^2"
    assert design.margins["max_c3"]["margin"] >= 0.0


def test_errors_are_the_commands_one_line():
    with pytest.raises(leverage.ProblemError) as caught:
        leverage.load_problem("[study]\nname = 3\n")
    assert str(caught.value) == "<text>: [study] name = 3: expected text in quotes"
    with pytest.raises(leverage.ProblemError, match="no such file"):
        leverage.load_problem("no/such/problem.toml")


def test_text_and_path_give_the_same_problem():
    path = ROOT / "problems" / "demo.toml"
    from_text = leverage.load_problem(path.read_text(encoding="utf-8"))
    from_path = leverage.load_problem(path)
    assert from_text.sha256 == from_path.sha256
    assert from_text.values == from_path.values


@pytest.mark.slow
def test_solve_without_a_folder_matches_the_same_seed_with_one(tmp_path):
    problem = leverage.load_problem(ROOT / "problems" / "demo.toml")
    small = {"seed": 5, "generations": 60, "population": 16, "islands": 2}
    kept = leverage.solve(problem, **small)
    written = leverage.solve(problem, out=tmp_path / "run", **small)
    assert kept.folder is None and written.folder == tmp_path / "run"
    assert kept.record["decision_vector"] == written.record["decision_vector"]
    assert leverage.open_result(tmp_path / "run").record == written.record
    with pytest.raises(ValueError, match="no result folder"):
        kept.plot()
