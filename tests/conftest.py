"""Shared test fixtures.

Optimizer tests are marked ``slow`` and run at a small size by default (and in CI);
``pytest --full-size`` runs them at the problem files' own settings.
"""

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PROBLEMS = ROOT / "problems"


def pytest_addoption(parser):
    parser.addoption(
        "--full-size",
        action="store_true",
        default=False,
        help="run optimizer tests at the problem files' own sizes",
    )


@pytest.fixture
def full_size(request) -> bool:
    return request.config.getoption("--full-size")


@pytest.fixture(scope="session")
def demo_path() -> Path:
    return PROBLEMS / "demo.toml"


@pytest.fixture(scope="session")
def problems_dir() -> Path:
    return PROBLEMS


@pytest.fixture(scope="session")
def demo_result(tmp_path_factory) -> Path:
    """A result folder from one small real run of the demo problem, made once per session:
    ``leverage run problems/demo.toml --generations 50 --islands 1`` (in this process).
    Shared by the tests of arcs, plots, verify, export and show; treat it as read-only."""
    from leverage.cli import main

    out = tmp_path_factory.mktemp("demo_result") / "run"
    code = main(
        [
            "run",
            str(PROBLEMS / "demo.toml"),
            "--out",
            str(out),
            "--generations",
            "50",
            "--islands",
            "1",
            "--quiet",
        ]
    )
    assert code in (0, 3), f"demo run failed with exit code {code}"
    return out
