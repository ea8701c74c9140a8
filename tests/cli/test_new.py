"""Tests of ``leverage new``: every template writes a commented file that loads and
checks cleanly, lists every schema key, and an existing file is not overwritten.

Outside sources: none (the schema table in leverage/schema.py is the reference).
"""

import pytest

from leverage.cli import main
from leverage.cli.new import TEMPLATES
from leverage.problem.load import load_problem
from leverage.problem.schema import KEYS


@pytest.mark.parametrize("template", sorted(TEMPLATES))
def test_template_loads_and_checks(tmp_path, template, capsys):
    path = tmp_path / f"{template}.toml"
    assert main(["new", str(path), "--template", template]) == 0
    text = path.read_text()
    for key in KEYS:
        assert f"{key.name} =" in text, key.path  # every key, active or commented out
    problem = load_problem(path)
    assert main(["check", str(path), "--samples", "2"]) == 0
    out = capsys.readouterr().out
    assert "valid" in out and "feasibility screen" in out
    if template == "target":
        assert problem.target is not None
    if template == "mass":
        assert (
            problem.vehicle is not None and problem.values["goal"]["kind"] == "max_delivered_mass"
        )
    if template == "front":
        assert problem.compile().n_obj == 2
    if template == "multi-year":
        assert problem.values["loop"]["revolutions"] == [0, 2]


def test_default_template_has_no_optional_sections(tmp_path):
    path = tmp_path / "plain.toml"
    assert main(["new", str(path)]) == 0
    problem = load_problem(path)
    assert problem.target is None and problem.vehicle is None
    assert "# [target]" in path.read_text() and "# [vehicle]" in path.read_text()


def test_existing_file_is_not_overwritten_without_force(tmp_path, capsys):
    path = tmp_path / "mine.toml"
    path.write_text("# my own work\n")
    assert main(["new", str(path)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "--force" in err and str(path) in err
    assert path.read_text() == "# my own work\n"
    assert main(["new", str(path), "--force"]) == 0
    assert path.read_text().startswith("# leverage problem file")
