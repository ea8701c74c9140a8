"""Pictures of a result folder (leverage.plots): files written, valid PNGs of sensible
size, and the plotted data equal to the result's data.

Outside sources: the PNG file signature and IHDR chunk layout (PNG specification,
W3C/ISO 15948, sections 5.2 and 11.2.2). The knee definition checked (largest
distance from the line joining a front's ends, after scaling) is common practice.
Fixtures: a real small run of the (invented) demo problem; front and sweep tables
are written here with the columns the front search and the sweep write.
"""

import csv
import json
import shutil
import struct

import numpy as np
import pytest
from matplotlib import dates as mdates

from leverage.astro import bodies
from leverage.fileio import read_json
from leverage.record.arcs import design_arcs, event_states
from leverage.reports import plots

AU = bodies.AU_KM
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def png_size(path):
    """(width, height) from the IHDR chunk, after checking the PNG signature."""
    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE, f"{path.name} is not a PNG"
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def assert_sensible_png(path):
    width, height = png_size(path)
    assert 500 <= width <= 3000 and 300 <= height <= 2000, (width, height)
    assert path.stat().st_size > 15_000  # a blank canvas of that size compresses far smaller


@pytest.fixture(scope="module")
def folder(demo_result, tmp_path_factory):
    """A private copy of the demo result (pictures are rewritten here)."""
    dest = tmp_path_factory.mktemp("plots") / "run"
    shutil.copytree(demo_result, dest)
    return dest


@pytest.fixture(scope="module")
def record(folder):
    return read_json(folder / "best.json")


def test_a_run_writes_its_pictures(demo_result):
    for name in ("trajectory.png", "convergence.png"):
        assert_sensible_png(demo_result / name)
    assert not (demo_result / "front.png").exists()  # no front.csv in a one-objective run


def test_trajectory_draws_the_records_arcs_and_events(folder, record):
    pic = plots.trajectory(record, folder)
    assert pic.path == folder / "trajectory.png"
    assert_sensible_png(pic.path)
    horizontal, vertical, _ = plots.side_axes(record)
    for arc in design_arcs(record):
        line = pic.artists[arc.key]
        assert np.allclose(line.get_xdata(), arc.r_km[:, 0] / AU)
        assert np.allclose(line.get_ydata(), arc.r_km[:, 1] / AU)
        side = pic.artists[f"side {arc.key}"]
        assert np.allclose(side.get_xdata(), arc.r_km @ horizontal / AU)
        assert np.allclose(side.get_ydata(), arc.r_km[:, 2] / AU)
    for name, ev in event_states(record).items():
        marker = pic.artists[f"event {name}"]
        assert np.allclose(marker.get_offsets()[0], ev["r"][:2] / AU)
    assert np.allclose(pic.artists["sun"].get_offsets()[0], [0.0, 0.0])


def test_an_aphelion_goal_is_drawn_as_a_circle_of_its_radius_in_au(folder, record):
    assert "aphelion goal" not in plots.trajectory(record, folder).artists  # demo: no such goal
    goal = json.loads(json.dumps(record))
    goal["margins"]["min_outgoing_aphelion"] = {"limit": 1.3, "unit": "au", "margin": 0.01}
    circle = plots.trajectory(goal, folder).artists["aphelion goal"]
    radius = np.hypot(circle.get_xdata(), circle.get_ydata())
    assert np.allclose(radius, 1.3)  # au, as stated in the record (not km, not a diameter)
    assert circle.get_label() == "required aphelion 1.3 au"


def test_side_view_looks_across_the_outgoing_node_line(record):
    horizontal, vertical, looking = plots.side_axes(record)
    ev = event_states(record)
    h = np.cross(ev["flyby"]["r"], ev["flyby"]["v_out"])
    # the node line is in the ecliptic and in the outgoing orbit plane
    assert abs(horizontal[2]) < 1e-12 and abs(horizontal @ h) < 1e-9 * np.linalg.norm(h)
    assert np.allclose(vertical, [0, 0, 1])
    assert abs(looking @ horizontal) < 1e-12 and abs(looking[2]) < 1e-12


def test_convergence_draws_the_log(folder, record):
    pic = plots.convergence(record, folder)
    assert_sensible_png(pic.path)
    with open(folder / "convergence.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for island in {r["island"] for r in rows}:
        mine = [r for r in rows if r["island"] == island]
        line = pic.artists[f"island {island}"]
        assert np.allclose(line.get_xdata(), [float(r["generations"]) for r in mine])
        factor = record["objective_shown"][0]["factor"]  # drawn in its own unit and sign
        assert np.allclose(line.get_ydata(), [factor * float(r["best_objective"]) for r in mine])
    axes = pic.artists["island 0"].axes
    assert axes.get_ylabel() == "best total DSM (km/s, lower is better)"
    assert axes.get_xlabel() == "generations per island"


def test_convergence_marks_each_restart_and_never_runs_back(folder, record, tmp_path):
    """A log of two restart epochs (an island's evaluation count starts again with its
    new population): the line goes on in generations with a gap at the restart (the
    new population does not continue the old one's best), one marker there."""
    dest = tmp_path / "run"
    shutil.copytree(folder, dest)
    rows = [["evolution", "island", "generations", "evaluations", "best_objective"]]
    for island in (0, 1):
        for evolution, (gens, evals, best) in enumerate(
            [(200, 12864, 1.1), (400, 25664, 0.9), (600, 12864, 1.2), (800, 25664, 0.85)], 1
        ):
            rows.append([evolution, island, gens, evals, best])
    with open(dest / "convergence.csv", "w", newline="") as fh:
        csv.writer(fh).writerows(rows)
    pic = plots.convergence(record, dest)
    assert_sensible_png(pic.path)
    xs = pic.artists["island 1"].get_xdata()
    np.testing.assert_array_equal(xs, [200, 400, np.nan, 600, 800])
    np.testing.assert_array_equal(
        pic.artists["island 1"].get_ydata(), [1.1, 0.9, np.nan, 1.2, 0.85]
    )
    assert list(pic.artists["restart"].get_xdata()) == [400, 400]
    assert plots.restarts(plots._log_rows(dest / "convergence.csv"), "0") == [400.0]


def test_convergence_adds_the_hypervolume_when_logged(folder, record, tmp_path):
    dest = tmp_path / "run"
    shutil.copytree(folder, dest)
    rows = [
        ["evolution", "island", "evaluations", "best_objective", "hypervolume"],
        [1, 0, 100, 2.0, 0.5],
        [2, 0, 200, 1.5, 0.8],
        [1, 1, 100, 2.5, 0.4],
        [2, 1, 200, 1.2, 0.9],
    ]
    with open(dest / "convergence.csv", "w", newline="") as fh:
        csv.writer(fh).writerows(rows)
    pic = plots.convergence(record, dest)
    assert_sensible_png(pic.path)
    assert list(pic.artists["hypervolume 1"].get_ydata()) == [0.4, 0.9]
    assert list(pic.artists["island 0"].get_ydata()) == [2.0, 1.5]


def test_knee_of_an_l_shaped_front_is_its_corner():
    dsm = np.array([0.0, 0.1, 1.0, 2.0])
    gain = np.array([0.0, 1.9, 1.95, 2.0])
    assert plots.knee_index(dsm, gain) == 1
    # order does not matter
    assert plots.knee_index(dsm[::-1], gain[::-1]) == 2


def test_front_draws_front_csv_with_its_knee(folder, record, tmp_path):
    dest = tmp_path / "run"
    shutil.copytree(folder, dest)
    dsm = np.linspace(0.05, 1.5, 25)
    gain = 2.8 * (1 - np.exp(-dsm / 0.4))
    inc = 3 + 2 * dsm
    knee = 7
    with open(dest / "front.csv", "w", newline="") as fh:
        out = csv.writer(fh)
        # column names as the front search writes them (derived quantity + unit)
        out.writerow(
            [
                "member",
                "knee",
                "objective_total_dv_km_s",
                "dsm_km_s",
                "dsm_radial_km_s",
                "vinf_gain_km_s",
                "outgoing_inclination_deg",
            ]
        )
        for k in range(dsm.size):
            out.writerow([k, int(k == knee), dsm[k], dsm[k], 0.1, gain[k], inc[k]])
    pic = plots.front(record, dest)
    assert pic.path.name == "front.png"
    assert_sensible_png(pic.path)
    scatter = pic.artists["front"]
    assert np.allclose(scatter.get_offsets(), np.column_stack([dsm, gain]))
    assert np.allclose(scatter.get_array(), inc)
    assert np.allclose(pic.artists["knee"].get_offsets()[0], [dsm[knee], gain[knee]])
    assert plots.front(record, folder) is None  # no front.csv, no picture

    # The summary says no knee stands out (knee distance below the threshold): no circle.
    flat = dict(record, front={"knee_distance": 0.004})
    pic = plots.front(flat, dest)
    assert "knee" not in pic.artists
    assert pic.artists["no knee"].get_text().startswith("no knee stands out")


@pytest.mark.slow
def test_front_reads_a_real_front_search_table(tmp_path, problems_dir):
    """Small real run of the trade-front template: its front.csv gives a front picture."""
    from leverage.cli import main

    out = tmp_path / "front"
    code = main(
        [
            "run",
            str(problems_dir / "trade-front.toml"),
            "--out",
            str(out),
            "--generations",
            "50",
            "--islands",
            "1",
            "--quiet",
        ]
    )
    assert code in (0, 3)
    with open(out / "front.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    pic = plots.front(read_json(out / "best.json"), out)
    assert_sensible_png(pic.path)
    assert np.allclose(
        pic.artists["front"].get_offsets()[:, 0], [float(r["dsm_km_s"]) for r in rows]
    )
    assert np.allclose(
        pic.artists["front"].get_offsets()[:, 1], [float(r["vinf_gain_km_s"]) for r in rows]
    )


def test_launch_window_draws_the_sweep_table(folder, record, tmp_path):
    dest = tmp_path / "run"
    shutil.copytree(folder, dest)
    dates = ["2031-01-10T04:00:00", "2031-02-10T00:00:00", "", "2031-04-12T12:00:00"]
    objective = [1.2, 0.9, "", 1.1]
    feasible = [1, 1, "", 0]
    with open(dest / "sweep.csv", "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow(["slice", "start_utc", "end_utc", "best_objective", "feasible", "launch_utc"])
        for k in range(4):
            out.writerow(
                [
                    k + 1,
                    f"2031-0{k + 1}-01T00:00:00",
                    f"2031-0{k + 2}-01T00:00:00",
                    objective[k],
                    feasible[k],
                    dates[k],
                ]
            )
    pic = plots.launch_window(record, dest)
    assert_sensible_png(pic.path)
    line = pic.artists["scan"]
    assert list(line.get_ydata()) == [1.2, 0.9, 1.1]  # the unfinished slice is left out
    assert [d.strftime("%Y-%m-%d") for d in line.get_xdata()] == [
        "2031-01-10",
        "2031-02-10",
        "2031-04-12",
    ]
    assert len(pic.artists["infeasible"].get_offsets()) == 1
    # the best feasible slice is ringed
    assert pic.artists["best"].get_offsets()[0][1] == 0.9
    # nothing joins the slices (slice 3 was not sampled): dots, and one bar per slice
    # over its own launch dates
    assert line.get_linestyle() == "None"
    bars = pic.artists["slices"]
    assert [b.get_xdata()[0].strftime("%m-%d") for b in bars] == ["01-01", "02-01", "04-01"]
    assert [b.get_xdata()[1].strftime("%m-%d") for b in bars] == ["02-01", "03-01", "05-01"]
    # the launch period: slices 1-2 (slice 4 met no limit set), shaded Jan 1 to Mar 1
    (period,) = pic.artists["period"]
    x0, x1 = period.get_x(), period.get_x() + period.get_width()
    assert mdates.num2date(x0).strftime("%Y-%m-%d") == "2031-01-01"
    assert mdates.num2date(x1).strftime("%Y-%m-%d") == "2031-03-01"
    assert "edge" not in pic.artists and "budget" not in pic.artists
    assert plots.launch_window(record, folder) is None


def test_launch_window_units_budget_and_slice_edge(folder, record, tmp_path):
    """sweep.json's objective (a gain, minimised as its negative) is drawn in km/s with
    its natural sign, --max-objective as a line in the same terms, and a best launch on
    its slice's first date is flagged."""
    dest = tmp_path / "sweep"
    dest.mkdir()
    shown = [{"name": "v-infinity gain", "unit": "km/s", "factor": -1.0, "maximised": True}]
    (dest / "sweep.json").write_text(
        json.dumps({"problem": {"name": "gain"}, "objective_shown": shown, "max_objective": -2.5})
    )
    with open(dest / "sweep.csv", "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow(["slice", "start_utc", "end_utc", "best_objective", "feasible", "launch_utc"])
        out.writerow([1, "2031-01-01", "2031-02-01", -2.0, 1, "2031-01-12T00:00:00"])
        out.writerow([2, "2031-02-01", "2031-03-01", -3.0, 1, "2031-02-01T00:00:00"])
    pic = plots.launch_window({}, dest)
    assert list(pic.artists["scan"].get_ydata()) == [2.0, 3.0]
    assert pic.artists["best"].get_offsets()[0][1] == 3.0  # the larger gain is the best
    assert list(pic.artists["budget"].get_ydata()) == [2.5, 2.5]
    assert "at least 2.5 km/s" in pic.artists["budget"].get_label()
    assert pic.artists["edge"].get_offsets()[:, 1].tolist() == [3.0]
    assert "on its slice's edge" in pic.artists["best"].get_label()
    ax = pic.artists["scan"].axes
    assert ax.get_ylabel() == "v-infinity gain (km/s, higher is better)"


def test_all_pictures_skips_what_has_no_data(folder, record):
    names = [p.path.name for p in plots.all_pictures(record, folder)]
    assert names == ["trajectory.png", "convergence.png"]
