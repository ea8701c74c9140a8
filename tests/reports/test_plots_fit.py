"""Every piece of text in every picture lies inside the figure (issue 13: a side-view
label "... below the eclipti" was cut at the right edge).

Measured after drawing with matplotlib's Agg renderer: each visible, non-empty Text
artist's window extent against the figure's bounding box (display pixels at the
picture's own dpi, which is what savefig writes). Checked on the demo's result and
on a small real run of the target-leg template; front.png and launch_window.png on
tables written here in the front search's and the sweep's column names.
"""

import csv
import json
import math
import shutil
from pathlib import Path

import matplotlib.text
import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg

from leverage.fileio import read_json
from leverage.problem.load import load_problem
from leverage.reports import plots
from leverage.run.runner import Progress, run, settings_from

TOLERANCE_PX = 1.0
PROBLEMS = Path(__file__).resolve().parents[2] / "problems"


def texts_outside(fig) -> list[str]:
    """The texts of ``fig`` that stick out of it, with their extents."""
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    renderer = canvas.get_renderer()
    box = fig.bbox
    out = []
    undrawn = set()  # tick labels of ticks outside their axis's view: matplotlib skips them
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            span = (hi - lo) * 1e-9
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                if not lo - span <= tick.get_loc() <= hi + span:
                    undrawn.update((id(tick.label1), id(tick.label2)))
    for t in fig.findobj(matplotlib.text.Text):
        if not t.get_visible() or not t.get_text().strip() or id(t) in undrawn:
            continue
        e = t.get_window_extent(renderer)
        if (
            e.x0 < box.x0 - TOLERANCE_PX
            or e.y0 < box.y0 - TOLERANCE_PX
            or e.x1 > box.x1 + TOLERANCE_PX
            or e.y1 > box.y1 + TOLERANCE_PX
        ):
            out.append(f"{t.get_text()!r} at {e.bounds} outside {box.bounds}")
    return out


def figure_of(picture):
    first = next(iter(picture.artists.values()))
    return (first[0] if isinstance(first, list) else first).figure


@pytest.fixture(scope="module")
def target_result(tmp_path_factory):
    """A small real run of the target-leg template (no pictures or verification)."""
    problem = load_problem(PROBLEMS / "target-leg.toml")
    settings = settings_from(problem, {"generations": 100, "islands": 1, "population": 32})
    out = tmp_path_factory.mktemp("target") / "run"
    outcome = run(
        problem, settings, out, Progress(1, enabled=False), echo=lambda *a: None, after=False
    )
    assert outcome.status == "complete"
    return out


@pytest.mark.parametrize("which", ["demo", "target"])
def test_every_text_lies_inside_its_picture(which, demo_result, target_result, tmp_path):
    source = demo_result if which == "demo" else target_result
    folder = tmp_path / "run"
    shutil.copytree(source, folder)
    record = read_json(folder / "best.json")
    checked = 0
    for draw in (plots.trajectory, plots.convergence):
        picture = draw(record, folder)
        assert picture is not None
        assert texts_outside(figure_of(picture)) == [], picture.path.name
        checked += 1
    assert checked == 2


def test_front_and_launch_window_texts_lie_inside(demo_result, tmp_path):
    """front.png and launch_window.png from a front table and a sweep table with long
    labels: a long study name, a --max-objective line, a best launch on a slice edge."""
    folder = tmp_path / "run"
    shutil.copytree(demo_result, folder)
    record = read_json(folder / "best.json")
    record["problem"]["name"] = "a long study name of the kind analysts give their trades"
    with open(folder / "front.csv", "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow(["member", "knee", "dsm_km_s", "vinf_gain_km_s", "outgoing_inclination_deg"])
        for k, dsm in enumerate(np.linspace(0.05, 1.5, 20)):
            out.writerow([k, int(k == 6), dsm, 2.8 * (1 - math.exp(-dsm / 0.4)), 3 + 2 * dsm])
    shown = [{"name": "total DSM", "unit": "km/s", "factor": 1.0, "maximised": False}]
    (folder / "sweep.json").write_text(
        json.dumps({"problem": record["problem"], "objective_shown": shown, "max_objective": 1.2})
    )
    with open(folder / "sweep.csv", "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow(["slice", "start_utc", "end_utc", "best_objective", "feasible", "launch_utc"])
        for k, (value, ok) in enumerate([(0.95, 1), (1.4, 1), (0.9, 1), (2.0, 0)]):
            start, end = f"2031-{k + 1:02d}-01", f"2031-{k + 2:02d}-01"
            launch = f"{start}T00:00:00" if k == 2 else f"2031-{k + 1:02d}-15T00:00:00"
            out.writerow([k + 1, start, end, value, ok, launch])
    for draw in (plots.front, plots.launch_window):
        picture = draw(record, folder)
        assert picture is not None
        assert texts_outside(figure_of(picture)) == [], picture.path.name
    assert "edge" in picture.artists and "budget" in picture.artists
