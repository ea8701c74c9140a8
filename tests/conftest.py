"""Shared test fixtures.

Optimizer tests are marked ``slow`` and run at a small size by default (and in CI);
``pytest --full-size`` runs them at the problem files' own settings.
"""
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PROBLEMS = ROOT / "problems"


def pytest_addoption(parser):
    parser.addoption("--full-size", action="store_true", default=False,
                     help="run optimizer tests at the problem files' own sizes")


@pytest.fixture
def full_size(request) -> bool:
    return request.config.getoption("--full-size")


@pytest.fixture
def demo_path() -> Path:
    return PROBLEMS / "demo.toml"


@pytest.fixture
def problems_dir() -> Path:
    return PROBLEMS
