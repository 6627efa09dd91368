"""The local field solve (physics/peec.py) against outside references: published closed forms,
numerical quadrature, the reference sheet's independent solve, and its own convergence."""

import json
import subprocess
import sys

import numpy as np
import pytest

from returngap.physics import formulas as ph
from returngap.physics import peec

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]


def quadrature_mutual(ax, ay, bx, by, z, n=24):
    """μ0/4π · (1/(wa wb)) ∫∫∫∫ dx dx' dy dy' / R by Gauss-Legendre products (smooth integrand
    for separated tapes): a check independent of the closed form."""
    g, wts = np.polynomial.legendre.leggauss(n)

    def nodes(a, b):
        return 0.5 * (b - a) * g + 0.5 * (a + b), 0.5 * (b - a) * wts

    (x1, w1), (y1, v1) = nodes(*ax), nodes(*ay)
    (x2, w2), (y2, v2) = nodes(*bx), nodes(*by)
    dx = x1[:, None, None, None] - x2[None, :, None, None]
    dy = y1[None, None, :, None] - y2[None, None, None, :]
    wgt = w1[:, None, None, None] * w2[None, :, None, None] * v1[None, None, :, None] * v2
    total = (wgt / np.sqrt(dx * dx + dy * dy + z * z)).sum()
    return 0.1 * total / ((ay[1] - ay[0]) * (by[1] - by[0]))


@pytest.mark.parametrize(
    "a, b, z",
    [
        (((0, 2), (0, 0.5)), ((3, 5), (1, 1.3)), 0.0),  # side by side in one plane
        (((0, 4), (0, 0.3)), ((1, 6), (0.5, 1.0)), 0.2),  # overlapping, one above the other
        (((0, 1), (0, 1)), ((-2, 3), (-0.2, 0.2)), 0.5),
    ],
)
def test_tape_mutual_against_quadrature(a, b, z):
    # numerical quadrature of the Neumann double integral (independent of the closed form)
    got = peec.tape_mutual_nH(a[0], a[1], b[0], b[1], z)
    assert float(got) == pytest.approx(quadrature_mutual(a[0], a[1], b[0], b[1], z), rel=2e-3)


@pytest.mark.parametrize("length, width", [(10.0, 0.5), (20.0, 1.0), (50.0, 0.2)])
def test_tape_self_inductance_against_grover(length, width):
    # thin flat strip, l >> w: L = 0.2 l [ln(2l/w) + 1/2 + 0.2235 w/l] nH (l in mm); Grover,
    # Inductance Calculations (1946), rectangular bar with thickness zero; Ruehli 1972 eq. for
    # the partial self-inductance of a bar
    grover = 0.2 * length * (np.log(2 * length / width) + 0.5 + 0.2235 * width / length)
    got = float(peec.tape_mutual_nH((0, length), (0, width), (0, length), (0, width), 0.0))
    assert got == pytest.approx(grover, rel=5e-3)


@pytest.mark.parametrize("w, h", [(0.38, 0.2), (3.0, 1.6)])
def test_solid_plane_inductance_per_length_against_hammerstad_jensen(w, h):
    # L' of a microstrip in air = Z0(er=1)/c, Hammerstad & Jensen 1980; within 3 %
    def loop(length):
        xs = peec.graded_nodes(-length / 2, length / 2, [], max_size=1.0)
        ys = peec.graded_nodes(
            -12 * h - 4, 12 * h + 4, [(-w / 2, w / 8), (w / 2, w / 8), (0, w / 8)], 0.3
        )
        op = peec.PlaneOperator(xs, ys)
        strips = peec.trace_strips(xs[0], xs[-1], w)
        return peec.loop_inductance(op, np.ones(op.grid.shape, bool), strips, h).loop_nH

    per_mm = (loop(20.0) - loop(10.0)) / 10.0  # the window's two ends cancel
    z0_air, _ = ph.microstrip_z0_eeff(w, h, 1.0)
    assert per_mm == pytest.approx(z0_air / ph.C_MM_PER_NS, rel=0.03)


# independent numerical solve, this project's reference sheet (REFERENCE §12), not a paper
SHEET_CASES = [
    (5, 0.2, 0.1, 0.19, 0.67),
    (10, 1.0, 0.2, 0.38, 1.89),
    (24, 1.0, 1.6, 3.0, 2.28),
]


@pytest.mark.parametrize("d, s, h, w, want", SHEET_CASES)
def test_slot_against_reference_sheet_solve(d, s, h, w, want):
    got, _, _ = peec.rect_slot_added_inductance(d, s, h, w)
    assert got == pytest.approx(want, rel=0.10)


def test_refinement_and_domain_doubling_move_the_answer_little():
    # consistency of the solver with itself: a finer grid and a window twice as large
    base, _, _ = peec.rect_slot_added_inductance(10, 1.0, 0.2, 0.38)
    finer, _, _ = peec.rect_slot_added_inductance(10, 1.0, 0.2, 0.38, fine=0.5)
    wider, _, _ = peec.rect_slot_added_inductance(10, 1.0, 0.2, 0.38, margin=3.0)
    assert finer == pytest.approx(base, rel=0.02)
    assert wider == pytest.approx(base, rel=0.02)


def test_off_centre_crossing_adds_less():
    # geometry: nearer one end, the way round that end is shorter (stub model l1·l2/(l1+l2))
    centre, _, _ = peec.rect_slot_added_inductance(10, 0.5, 0.2, 0.38)
    near_end, _, _ = peec.rect_slot_added_inductance(10, 0.5, 0.2, 0.38, offset_mm=3.0)
    assert near_end < 0.9 * centre


def test_split_across_the_window_has_no_return_path():
    xs = peec.graded_nodes(-5, 5, [(-0.5, 0.1), (0.5, 0.1)])
    ys = peec.graded_nodes(-5, 5, [(0, 0.1)])
    op = peec.PlaneOperator(xs, ys)
    cx = 0.5 * (xs[1:] + xs[:-1])
    copper = np.repeat((np.abs(cx) > 0.5)[:, None], len(ys) - 1, axis=1)
    with pytest.raises(peec.NoReturnPath):
        peec.loop_inductance(op, copper, peec.trace_strips(-5, 5, 0.3), 0.2)


def test_demo_board_solve_from_the_command_line(tmp_path):
    # the demo board's SPI_SCK crossing, solved by `check --solve` and by `returngap solve`
    demo = ROOT / "examples" / "demo-board"
    out = tmp_path / "f.json"
    cmd = [sys.executable, "-m", "returngap.cli", "check", str(demo), "--stackup"]
    cmd += [str(demo / "stackup.toml"), "--json", str(out), "--fail-on", "never", "-q"]
    subprocess.run(cmd + ["--solve", "1"], check=True, capture_output=True)
    rep = json.loads(out.read_text())
    solved = [f for f in rep["findings"] if f.get("inductance_method") == "field-solve"]
    assert len(solved) == 1 and solved[0]["field_solve"]["grid_cells"] > 1000
    sck = next(f for f in rep["findings"] if f["net"] == "SPI_SCK")
    p = subprocess.run(
        [sys.executable, "-m", "returngap.cli", "solve", str(out), "--id", sck["id"], "--json"],
        check=True,
        capture_output=True,
        text=True,
    )
    again = json.loads(p.stdout)
    # the closed form is centred on the solve: within 25 % of it (our target for this board)
    closed = again["field_solve"]["closed_form_nH"]
    assert closed == pytest.approx(again["added_inductance_nH"], rel=0.25)


def test_a_plane_below_lowers_the_slot_inductance_as_the_sheet_says():
    # REFERENCE §12 (independent numerical solve, not a paper): a second solid plane 1.0 mm
    # below lowers ΔL by 25-45 %; here the 24 x 1 mm slot at h = 0.2 mm
    one, _, _ = peec.rect_slot_added_inductance(24, 1.0, 0.2, 0.38)
    two, _, _ = peec.rect_slot_added_inductance(24, 1.0, 0.2, 0.38, below_mm=1.0)
    assert 0.25 <= 1 - two / one <= 0.47


def test_demo_board_crossing_against_the_independent_audit():
    # the demo board's SPI_SCK crossing as an independent audit of the physics solved it (its
    # own dense PEEC prototype, not this code): 2.79 nH on L2 alone, 1.92 nH with the L3 plane
    import warnings

    from returngap.analysis import fieldsolve
    from returngap.run.pipeline import run_check

    warnings.simplefilter("ignore")
    demo = ROOT / "examples" / "demo-board"
    r = run_check(demo, demo / "stackup.toml")
    f = next(f for f in r.findings if f["net"] == "SPI_SCK")
    alone = fieldsolve.solve_crossing(r.board, r.nets, r.chains, f)
    below = fieldsolve.solve_crossing(r.board, r.nets, r.chains, f, r.refs)
    assert below.second_plane == "L3"
    assert alone.added_inductance_nH == pytest.approx(2.79, rel=0.10)
    assert below.added_inductance_nH == pytest.approx(1.92, rel=0.10)


def test_solved_return_share_round_the_near_end(tmp_path):
    # REFERENCE §12 (independent numerical solve, not a paper): crossing 6.6 mm from the end
    # of a 20 mm slot, the high-frequency share round the near end is 0.65 (the two-strip model
    # says 0.67-0.71)
    import warnings

    from boards import slot_board
    from returngap.model.settings import Settings
    from returngap.run.pipeline import run_check

    warnings.simplefilter("ignore")
    r = run_check(slot_board(tmp_path, D=20, offset=3.4), settings=Settings(field_solves=1))
    [f] = [f for f in r.findings if f["kind"] == "gap-crossing"]
    assert f["inductance_method"] == "field-solve"
    assert f["return_split"]["hf_method"] == "field-solve"
    assert f["return_split"]["hf_share_near"] == pytest.approx(0.65, abs=0.03)
    assert f["field_solve"]["second_plane"] == "L3"
    # the same sheet's resistive solve: 0.54 of the DC return round the near end (the strip
    # model says 0.67); ours is fed at the track's ends, the sheet's setup is not stated
    assert f["return_split"]["dc_method"].startswith("resistive grid")
    assert f["return_split"]["dc_share_near"] == pytest.approx(0.54, abs=0.03)
