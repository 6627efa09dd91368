"""Precision: the findings a reviewer can act on, on boards of our own whose answer follows from
their geometry and from published formulas."""

import math

import pytest

from boards import (
    feed_track_board,
    narrow_split_board,
    pour_between_planes_board,
    slot_board,
    stripline_board,
)
from returngap.analysis import grouping, severity
from returngap.io import config
from returngap.model.findings import GapCrossing
from returngap.model.settings import Settings
from returngap.physics import formulas as physics
from returngap.run.pipeline import run_check

C_MM_PER_NS = 299.792458


def crossings(result, net=None):
    return [
        f
        for f in result.findings
        if f["kind"] == "gap-crossing" and (net is None or f["net"] == net)
    ]


def test_pour_between_solid_planes_is_no_reference(tmp_path):
    # SIG on L3 has solid GND 0.1 mm below (L4); the L2 pour 0.4 mm above, opened round its own
    # tracks, is farther: its openings are no gaps to SIG
    r = run_check(pour_between_planes_board(tmp_path / "a"))
    assert [ref.layer for ref in r.refs["L3"]] == ["L4"]
    assert crossings(r, "SIG") == []
    # the same board without the solid plane below: the pour is SIG's only plane, its five
    # openings (36 mm long, the return round their ends) are real slots
    bare = run_check(pour_between_planes_board(tmp_path / "b", solid_below=False))
    assert [ref.layer for ref in bare.refs["L3"]] == ["L2"]
    found = crossings(bare, "SIG")
    assert len(found) == 5
    assert all(
        f["gap_type"] == "slot" and f["gap_length_mm"] == pytest.approx(36.0, abs=0.1)
        for f in found
    )


def _cohn_air_inductance_nH_per_mm(w, b):
    """Centred stripline in air, Cohn 1954 exact form, with scipy's elliptic integral (m = k^2):
    an implementation of its own, not the tool's."""
    from scipy.special import ellipk

    k = 1 / math.cosh(math.pi * w / (2 * b))
    kp = math.tanh(math.pi * w / (2 * b))
    z0 = 30 * math.pi * ellipk(k**2) / ellipk(kp**2)
    return z0 / C_MM_PER_NS


def _mline_air_inductance_nH_per_mm(w, h, t):
    """Microstrip L' from scikit-rf's MLine (Hammerstad & Jensen 1980): Z0 sqrt(eeff)/c, which
    does not depend on the dielectric (scikit-rf cannot take er = 1 itself)."""
    skrf = pytest.importorskip("skrf")
    from skrf.media import MLine

    m = MLine(
        frequency=skrf.Frequency(1, 1, 1, unit="MHz"),
        w=w * 1e-3,
        h=h * 1e-3,
        t=t * 1e-3,
        ep_r=4.3,
        tand=0,
        model="hammerstadjensen",
        disp="none",
        diel="frequencyinvariant",
        compatibility_mode="qucs",
    )
    return float(abs(m.zl_eff)) * math.sqrt(float(abs(m.ep_reff))) / C_MM_PER_NS


def test_stripline_with_one_plane_cut_uses_the_other_plane(tmp_path):
    # DQS (0.1 mm) between L2 (0.2 mm above, a 20 x 0.5 mm slot) and L4 (0.6 mm below, whole):
    # the return moves to L4 for the 0.5 mm crossed; added L = (L'ms(h = 0.6) - L'sl) * 0.5 mm,
    # microstrip from scikit-rf (Hammerstad & Jensen 1980), the offset stripline as the parallel
    # combination of Cohn's centred lines of spacing 2*0.2 and 2*0.6 (Cohn 1954; Wadell 1991)
    r = run_check(stripline_board(tmp_path / "a", h1=0.2, h2=0.6), settings=Settings(show_all=True))
    [f] = crossings(r)
    assert f["return_path"] == "other plane" and f["reference_layer"] == "L2"
    la, lb = _cohn_air_inductance_nH_per_mm(0.1, 0.4), _cohn_air_inductance_nH_per_mm(0.1, 1.2)
    expect = (_mline_air_inductance_nH_per_mm(0.1, 0.6, 0.035) - 2 * la * lb / (la + lb)) * 0.5
    assert f["added_inductance_nH"] == pytest.approx(expect, rel=0.03)
    assert f["severity"] == "info"
    # below the noise floor (0.1 nH) it is no finding at all by default
    assert crossings(run_check(stripline_board(tmp_path / "b", h1=0.2, h2=0.6))) == []
    # both planes cut at the same place: the return must go round, the detour model counts
    both = run_check(stripline_board(tmp_path / "c", both=True))
    paths = {(f["reference_layer"], f["return_path"]) for f in crossings(both)}
    assert ("L2", "detour") in paths
    assert max(f["added_inductance_nH"] for f in crossings(both)) > 10 * expect


def test_the_other_plane_carries_the_return_where_it_lies(tmp_path):
    # DQS on L3 runs 20 mm over an opening of L2 (x 20-40); L4, 0.6 mm below, has its own hole
    # under the last 6 mm of it. The return moves to L4 for the 14 mm it covers: added L =
    # (L'ms(h = 0.6) - L'sl) * 14 mm (Hammerstad & Jensen 1980 by scikit-rf, Cohn 1954), not a
    # loop round a 20 mm opening; where both planes are open, L4's own crossing says so
    from returngap.synth import SynthBoard, Via, rect

    b = SynthBoard("p", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (0.2, 4.3), (0.6, 4.3)])
    b.planes += [(2, "GND", rect(0, 0, 60, 40)), (4, "GND", rect(0, 0, 60, 40))]
    b.cutouts += [(2, rect(20, 15, 40, 25)), (4, rect(34, 15, 40, 25))]
    b.tracks.append((3, "DQS", [(10, 20), (50, 20)], 0.1))
    b.tracks.append((1, "LED", [(5, 35), (15, 35)], 0.2))  # the top layer is not empty
    b.vias.append(Via(5, 5, "GND"))
    b.write(tmp_path)
    found = crossings(run_check(tmp_path, settings=Settings(show_all=True)))
    [over_l2] = [f for f in found if f["reference_layer"] == "L2"]
    assert over_l2["return_path"] == "other plane"
    la, lb = _cohn_air_inductance_nH_per_mm(0.1, 0.4), _cohn_air_inductance_nH_per_mm(0.1, 1.2)
    per_mm = _mline_air_inductance_nH_per_mm(0.1, 0.6, 0.035) - 2 * la * lb / (la + lb)
    assert over_l2["added_inductance_nH"] == pytest.approx(per_mm * 14.0, rel=0.05)
    assert "70 %" in over_l2["inductance_method"]
    assert [f["return_path"] for f in found if f["reference_layer"] == "L4"] == ["detour"]


def test_a_stripline_off_one_plane_returns_in_the_other(tmp_path):
    # DQS on L3 leaves the L4 plane (0.2 mm below, it ends at x = 30) for its last 20 mm; L2,
    # 0.6 mm above, is whole: the return moves to L2, added L = (L'ms(h = 0.6) - L'sl) * 20 mm
    # (Hammerstad & Jensen 1980 by scikit-rf, Cohn 1954), not a return receding from the edge
    from returngap.synth import SynthBoard, Via, rect

    b = SynthBoard("e", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (0.6, 4.3), (0.2, 4.3)])
    b.planes += [(2, "GND", rect(0, 0, 60, 40)), (4, "GND", rect(0, 0, 30, 40))]
    b.tracks.append((3, "DQS", [(10, 20), (50, 20)], 0.1))
    b.tracks.append((1, "LED", [(5, 35), (15, 35)], 0.2))  # the top layer is not empty
    b.vias.append(Via(5, 5, "GND"))
    b.write(tmp_path)
    runs = [
        f for f in run_check(tmp_path).findings if f["kind"] == "edge-run" and f["net"] == "DQS"
    ]
    [run] = [f for f in runs if f["off_plane"]]
    assert run["reference_layer"] == "L4" and run["run_length_mm"] == pytest.approx(20, abs=0.3)
    la, lb = _cohn_air_inductance_nH_per_mm(0.1, 0.4), _cohn_air_inductance_nH_per_mm(0.1, 1.2)
    per_mm = _mline_air_inductance_nH_per_mm(0.1, 0.6, 0.035) - 2 * la * lb / (la + lb)
    assert run["added_inductance_nH"] == pytest.approx(per_mm * 20.0, rel=0.05)
    assert run["inductance_method"].startswith("one plane missing")


def _simulated_peak_reflection(l_nH, z0, rise_ns, steps=20000):
    """Time-stepped circuit of its own: a matched source (2 v_i behind Z0) drives a series L into
    a matched load; v_i a linear ramp 0 -> 1 over rise_ns; the reflected wave v_i - Z0 I."""
    t_end = 3 * rise_ns + 10 * l_nH / (2 * z0)
    dt = t_end / steps
    current, peak = 0.0, 0.0
    for k in range(steps):
        v_i = min(1.0, (k + 0.5) * dt / rise_ns)
        current += dt * (2 * v_i - 2 * z0 * current) / l_nH  # nH, ns: volts / ohm
        peak = max(peak, min(1.0, (k + 1) * dt / rise_ns) - z0 * current)  # at the step's end
    return peak


def test_ramp_reflection_small_and_large_inductance():
    # the peak of a linear ramp through a series L, against a time-stepped circuit (geometry of
    # the circuit, no source needed); its small-L limit is L/(2 Z0 Tr) (Bogatin, from memory)
    for l_nH, z0, tr in [(0.5, 50, 0.5), (5.0, 50, 0.5), (20.0, 50, 0.1)]:
        got = physics.series_inductance_reflection(l_nH, z0, tr)
        assert got == pytest.approx(_simulated_peak_reflection(l_nH, z0, tr), rel=0.01)
    assert physics.series_inductance_reflection(0.05, 50, 1.0) == pytest.approx(
        0.05 / 100, rel=1e-3
    )
    assert physics.series_inductance_reflection(1e6, 50, 0.1) < 1.0


def test_split_with_little_inductance_is_no_error(tmp_path):
    # a split's severity comes from its effect: the same split board at a slow edge (5 ns) adds
    # the same inductance but reflects ten times less than at 0.5 ns
    fast = crossings(run_check(slot_board(tmp_path / "a", split=True)))
    slow = crossings(
        run_check(slot_board(tmp_path / "b", split=True), settings=Settings(rise_time_ns=5.0))
    )
    assert fast[0]["gap_type"] == slow[0]["gap_type"] == "split"
    assert fast[0]["severity"] == "error" and slow[0]["severity"] != "error"
    # the ladder itself: 0.4 nH on 50 ohm at 0.5 ns reflects 0.8 % (L/(2 Z0 Tr)), with a 70 GHz
    # resonance against a 1 GHz knee: info, not an error
    refl = physics.series_inductance_reflection(0.4, 50, 0.5)
    assert refl == pytest.approx(0.008, rel=0.01)
    assert severity.gap_crossing(refl, 70.0, 1.0, Settings()) == "info"
    # a resonance under the knee raises a crossing that already reflects a quarter of the budget
    assert severity.gap_crossing(0.03, 0.8, 1.0, Settings()) == "warning"
    assert severity.gap_crossing(0.01, 0.8, 1.0, Settings()) == "info"


def test_narrow_split_strip_is_reported_once(tmp_path):
    r = run_check(narrow_split_board(tmp_path))
    found = crossings(r, "CLK")
    assert [f["gap_type"] for f in found] == ["split"]


def test_feed_track_through_the_plane_is_a_slot(tmp_path):
    # a 5 V feed track routed through the GND plane, its clearance cut round it: a 41 mm slot
    # (40 mm track + 2 x 0.5 mm clearance and half width) with the track inside; CLK crosses its
    # middle: the return goes round an end, about 41 mm of detour (geometry)
    r = run_check(feed_track_board(tmp_path))
    [f] = crossings(r, "CLK")
    assert f["gap_type"] == "slot" and f["return_path"] == "detour"
    assert f["gap_length_mm"] == pytest.approx(41.0, abs=0.1)
    assert f["detour_mm"] == pytest.approx(41.0, abs=1.0)
    # the field solve of the same crossing (physics/peec.py, validated on its own) lies in the
    # closed form's range
    from returngap.analysis import fieldsolve

    solved = fieldsolve.solve_crossing(r.board, r.nets, r.chains, f, r.refs)
    assert solved.second_plane == "L3"
    solved = solved.added_inductance_nH
    lo, hi = f["added_inductance_range_nH"]
    assert lo <= solved <= hi
    # with the L3 plane 1 mm below, a few nH: under half the 10 % budget at 0.5 ns (ladder)
    assert f["reflection_fraction"] * f["interrupted_fraction"] < 0.05
    assert f["severity"] == "info"


def _crossing(x, y, net="CLK", nh=1.0, sev="warning", gap_id="aaaaaaaaaaaa", enclosed=True):
    return GapCrossing(
        id=f"{int(x * 10):06d}{int(y * 10):06d}",
        severity=sev,
        net=net,
        layer="L1",
        x_mm=x,
        y_mm=y,
        gap_type="slot",
        reference_layer="L2",
        reference_net="GND",
        gap_length_mm=10.0,
        gap_width_mm=0.5,
        detour_mm=5.0,
        detour_method="taut-hull",
        interrupted_fraction=0.9,
        added_inductance_nH=nh,
        added_inductance_range_nH=[nh, nh],
        inductance_method="test",
        resonance_GHz=10.0,
        resonance_range_GHz=[10.0, 10.0],
        resonance_er_eff=4.3,
        resonance_mode="half-wave",
        reflection_fraction=0.01,
        z0_ohm=50.0,
        trace_width_mm=0.2,
        height_mm=0.2,
        line_type="microstrip",
        plane_share=1.0,
        crossing="cross",
        detour_path_mm=None,
        slot_ends_mm=None,
        return_path="detour",
        rise_time_ns=0.5,
        gap_id=gap_id,
        gap_enclosed=enclosed,
    )


def test_near_duplicates_merge_into_the_worst():
    fs = [_crossing(10.0, 10.0, nh=1.0), _crossing(10.3, 10.0, nh=2.0), _crossing(12.0, 10.0)]
    out = grouping.merge_duplicates(fs)
    assert [(f["x_mm"], f.get("merged")) for f in out] == [(10.3, 1), (12.0, None)]
    # another net at the same place is no duplicate
    assert len(grouping.merge_duplicates(fs[:1] + [_crossing(10.1, 10.0, net="DQ0")])) == 2


def test_noise_floor_and_all():
    weak = _crossing(10.0, 10.0, nh=0.05)
    assert grouping.refine([weak], Settings()) == []
    assert len(grouping.refine([weak], Settings(show_all=True))) == 1


def test_gap_groups_split_an_open_gap_into_buses():
    # an open gap (a split) runs far: crossings 20 mm apart are two groups; an enclosed slot
    # keeps one id however far apart its crossings are
    open_gap = [_crossing(x, 10.0, net=f"D{k}", enclosed=False) for k, x in enumerate((10, 11, 31))]
    ids = [f["gap_id"] for f in grouping.gap_ids(open_gap)]
    assert ids[0] == ids[1] != ids[2]
    slot = [_crossing(x, 10.0, net=f"D{k}") for k, x in enumerate((10, 11, 31))]
    assert len({f["gap_id"] for f in grouping.gap_ids(slot)}) == 1


def test_net_classes_from_the_stackup_file(tmp_path):
    cfg = tmp_path / "s.toml"
    cfg.write_text(
        '[[net_class]]\nname = "slow"\nnets = ["clk*"]\nrise_time_ns = 5.0\n'
        '[[net_class]]\nnets = ["TEST_*"]\ncheck = false\n'
    )
    board = slot_board(tmp_path / "b")
    fast = crossings(run_check(board))
    slow = crossings(run_check(board, cfg))
    assert fast[0]["rise_time_ns"] == 0.5 and slow[0]["rise_time_ns"] == 5.0
    # the same inductance, a tenth of the edge rate: about a tenth of the reflection
    assert slow[0]["added_inductance_nH"] == pytest.approx(fast[0]["added_inductance_nH"])
    assert slow[0]["reflection_fraction"] < 0.15 * fast[0]["reflection_fraction"]
    s = Settings(net_classes=config.load_stackup_file(cfg)["thresholds"]["net_classes"])
    assert not s.checks_net("test_point3") and s.checks_net("CLK") and s.rise_ns_for("x") == 0.5
    bad = tmp_path / "bad.toml"
    bad.write_text('[[net_class]]\nnets = ["A"]\nrise = 1\n')
    with pytest.raises(Exception, match="unknown key"):
        config.load_stackup_file(bad)


def test_one_run_off_the_plane_is_one_finding(tmp_path):
    # the track leaves the plane's edge at x = 30 and runs 20 mm beyond it, its width changing
    # at x = 40: one run of 20 mm (geometry), not two runs with a "track end" between
    from boards import off_plane_neck_board

    r = run_check(off_plane_neck_board(tmp_path))
    runs = [f for f in r.findings if f["kind"] == "edge-run" and f["off_plane"]]
    assert len(runs) == 1
    assert runs[0]["run_length_mm"] == pytest.approx(20.0, abs=0.6)
    xs = sorted(p[0] for p in runs[0]["run_ends_mm"])
    assert xs[0] == pytest.approx(30.0, abs=0.6) and xs[1] == pytest.approx(50.0, abs=0.01)


@pytest.mark.parametrize("sides", [2, 1])
def test_coplanar_ground_beside_the_track_carries_the_return(tmp_path, sides):
    # GND on L1 0.15 mm from each edge of the 0.2 mm track over a 0.5 mm slot in L2: the return
    # follows the coplanar ground; added L = (L'cpw - L'ms) * 0.5 mm, coplanar waveguide in air
    # (Wen 1969: (mu0/4) K(k')/K(k), k = w/(w + 2g), scipy's K), microstrip from scikit-rf
    # (Hammerstad & Jensen 1980); one side only: twice the two-sided L' (an upper estimate)
    from scipy.special import ellipk

    from boards import coplanar_board

    r = run_check(coplanar_board(tmp_path, gap=0.15, sides=sides), settings=Settings(show_all=True))
    [f] = [x for x in crossings(r, "CLK") if x["reference_layer"] == "L2"]
    assert f["return_path"] == "coplanar"
    k = 0.2 / (0.2 + 2 * 0.15)
    cpw = 0.4 * math.pi / 4 * ellipk(1 - k**2) / ellipk(k**2) * (1 if sides == 2 else 2)
    expect = (cpw - _mline_air_inductance_nH_per_mm(0.2, 0.2, 0.035)) * 0.5
    assert f["added_inductance_nH"] == pytest.approx(expect, rel=0.03)
    # without the coplanar copper the same slot is a detour of about its length (slot_board)
    [bare] = crossings(run_check(slot_board(tmp_path / "bare", D=20.0, s=0.5)), "CLK")
    assert (
        bare["return_path"] == "detour"
        and bare["added_inductance_nH"] > 5 * f["added_inductance_nH"]
    )


def _two_net_split(folder, with_part):
    """L2 split at x = 30 between GND (left) and P3V3 (right), L3 GND whole; CLK on L1 crosses
    the split at (30, 20); with_part: a capacitor C7 on L1 across the split at (30, 30), each pad
    on a via to its side's plane."""
    from boards import H
    from returngap.synth import SynthBoard, Via, rect

    b = SynthBoard("s", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes += [(2, "GND", rect(0, 0, 29.75, 40)), (2, "P3V3", rect(30.25, 0, 60, 40))]
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.tracks.append((1, "CLK", [(10, 20), (50, 20)], 0.2))
    b.vias += [Via(5, 5, "GND"), Via(55, 35, "P3V3"), Via(5, 35, "GND")]
    if with_part:
        b.pads += [(1, 29.0, 30.0, 0.8, 0.9, "GND", ("C7", "1"))]
        b.pads += [(1, 31.0, 30.0, 0.8, 0.9, "P3V3", ("C7", "2"))]
        b.vias += [Via(29.0, 30.0, "GND"), Via(31.0, 30.0, "P3V3")]
    b.write(folder)
    return folder


def test_a_split_crosses_through_its_nearest_bridging_part(tmp_path):
    # the return of a track over a split between two plane nets goes to the part that bridges
    # them and through it (geometry: C7 is 10 mm from the crossing); without the part the data
    # says no part bridges them
    bridged = [f for f in run_check(_two_net_split(tmp_path / "a", True)).findings]
    [f] = [f for f in bridged if f["kind"] == "gap-crossing" and f["net"] == "CLK"]
    assert f["gap_type"] == "split" and f["bridge_part"] == "C7"
    assert f["bridge_distance_mm"] == pytest.approx(10.0, abs=0.1)
    assert 1.0 < f["added_inductance_nH"] < 10.0  # a part's loop and a 10 mm way to it
    from returngap.report import core

    assert "through C7" in core.said(f, Settings())["message"]
    lone = [f for f in run_check(_two_net_split(tmp_path / "b", False)).findings]
    [g] = [g for g in lone if g["kind"] == "gap-crossing" and g["net"] == "CLK"]
    assert g["bridge_part"] is None and g["parts_known"] is False  # no .P attributes at all
    assert "no part information" in core.said(g, Settings())["message"]
