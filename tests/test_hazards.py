"""The other risk kinds on hand-made boards whose answers follow from geometry and the published
formulas."""

import math

import pytest

from boards import H, hazard_board
from returngap.model.settings import Settings
from returngap.physics import formulas as physics
from returngap.run.pipeline import run_check


def kinds(folder, kind, **kw):
    return [f for f in run_check(folder, settings=Settings(**kw)).findings if f["kind"] == kind]


def test_physics_vectors():
    # via pair (REFERENCE 10 #25, Paul 2010): h = 1, s = 1, r = 0.15 -> 0.7495 nH
    assert physics.via_pair_inductance_nH(1.0, 1.0, 0.15) == pytest.approx(0.7495, rel=1e-3)
    # patch island (REFERENCE 10 #28, Balanis / Hammerstad 1975, from memory): 20 x 5, h 0.2,
    # er 4.3 -> 3.710 GHz
    assert physics.patch_resonance_GHz(20, 5, 0.2, 4.3) == pytest.approx(3.710, rel=5e-3)
    assert physics.patch_resonance_GHz(20, 5, 0.2, 4.3, tied_at_one_end=True) == pytest.approx(
        1.855, rel=5e-3
    )
    # current beyond an edge (REFERENCE 1.1): d = h -> 25 %, 3h -> 10.2 %
    assert physics.microstrip_fraction_beyond_edge(0.2, 0.2) == pytest.approx(0.25)
    assert physics.microstrip_fraction_beyond_edge(0.6, 0.2) == pytest.approx(0.1024, abs=1e-3)
    # two-branch return, short branch half the long one: two thirds of the DC current (Ohm's
    # law, common practice)
    r_short = physics.copper_resistance_ohm(10, 0.5, 0.035)
    r_long = physics.copper_resistance_ohm(20, 0.5, 0.035)
    dc, hf = physics.two_branch_shares(r_short, r_long, 5.0, 12.0)
    assert dc == pytest.approx(2 / 3) and hf == pytest.approx(12 / 17)


def test_reference_change_to_stitching_via(tmp_path):
    f = kinds(hazard_board(tmp_path, stitch_dx=3.0), "reference-change", rise_time_ns=0.05)
    assert len(f) == 1
    f = f[0]
    assert (
        f["net"],
        f["layer"],
        f["to_layer"],
        f["reference_layer"],
        f["other_reference_layer"],
    ) == ("SIG_A", "L1", "L4", "L2", "L3")
    assert f["distance_mm"] == pytest.approx(3.0, abs=1e-6)
    # two-wire via pair over the plane spacing (REFERENCE 3.6): (mu0 h/pi) acosh(s/2r)
    assert f["added_inductance_nH"] == pytest.approx(0.4 * 1.0 * math.acosh(3.0 / 0.3), rel=1e-6)


def test_a_stripline_layer_change_counts_each_planes_share(tmp_path):
    # DQ on L3 runs between P3V3 (L2) and GND (L4), 0.2 mm each way (half the return on each,
    # REFERENCE 1.3), then drops to L6 over GND (L5). The GND half crosses at a GND via 3 mm away,
    # the P3V3 half at C7, 20 mm away. Each share forced through its own way: 0.25 L_C7 +
    # 0.25 L_via, each a two-wire via pair (mu0 h/pi) acosh(s/2r) (REFERENCE 3.6), the part with
    # its 1 nH loop; not the whole L_C7 the P3V3 plane alone would give
    from returngap.synth import SynthBoard, Via, rect

    diel = [(0.2, 4.3), (0.2, 4.3), (0.2, 4.3), (1.0, 4.3), (0.2, 4.3)]
    b = SynthBoard("r", 60, 45, n_layers=6, dielectrics=diel)
    b.planes += [(2, "P3V3", rect(0, 0, 60, 45)), (4, "GND", rect(0, 0, 60, 45))]
    b.planes.append((5, "GND", rect(0, 0, 60, 45)))
    b.tracks += [(3, "DQ", [(10, 20), (30, 20)], 0.1), (6, "DQ", [(30, 20), (50, 20)], 0.1)]
    b.tracks.append((1, "LED", [(5, 5), (15, 5)], 0.2))
    b.vias += [Via(30, 20, "DQ"), Via(30, 23, "GND"), Via(55, 5, "P3V3")]
    b.pads += [(1, 29.0, 40.0, 0.8, 0.9, "GND", ("C7", "1"))]
    b.pads += [(1, 31.0, 40.0, 0.8, 0.9, "P3V3", ("C7", "2"))]
    b.vias += [Via(29.0, 40.0, "GND"), Via(31.0, 40.0, "P3V3")]
    b.write(tmp_path)
    [f] = kinds(tmp_path, "reference-change", rise_time_ns=0.05)
    two_wire = lambda h, s: 0.4 * h * math.acosh(s / 0.3)  # noqa: E731, r = 0.15 mm
    l_part = two_wire(0.2 + 0.2 + 1.0 + 2 * 0.035, 20.0) + 1.0  # L2 to L5 (L3, L4 copper between)
    l_via = two_wire(1.0, 3.0)  # L4 to L5, the GND via 3 mm away
    assert f["added_inductance_nH"] == pytest.approx(0.25 * (l_part + l_via), rel=0.02)
    assert f["inductance_method"].startswith("stripline") and f["bridge_part"] == "C7"
    assert f["added_inductance_range_nH"][0] < f["added_inductance_nH"] < 0.5 * l_part


def test_edge_run_distance_in_h(tmp_path):
    f = [x for x in kinds(hazard_board(tmp_path, edge_gap=0.5), "edge-run") if x["net"] == "SIG_B"]
    assert len(f) == 1
    assert f[0]["edge_distance_h"] == pytest.approx(0.5 / H, abs=1e-6)  # 2.5 h
    assert f[0]["run_length_mm"] == pytest.approx(30.0, abs=0.3)
    # filament law (Johnson & Graham 1993, REFERENCE 1.1): 1/2 - atan(2.5)/pi beyond 2.5 h
    assert f[0]["beyond_edge_fraction"] == pytest.approx(0.1211, abs=5e-4)
    assert not [
        x
        for x in kinds(hazard_board(tmp_path / "far", edge_gap=2.0), "edge-run")
        if x["net"] == "SIG_B"
    ]


@pytest.mark.parametrize("edge_gap", [0.5, 0.15])
def test_edge_runs_from_the_kept_samples_are_those_from_all_samples(
    tmp_path, monkeypatch, edge_gap
):
    """Only the samples looked at (and one for each stretch of others) are measured: the edge
    runs come out the same, to the last digit, as when every sample is kept (a track 2.5 h, then
    0.75 h inside the plane's edge)."""
    import numpy as np

    from returngap.checks import edge_run

    def keep_all(lengths, counts, run, piece_line, flag):
        dists = [np.linspace(0, L, n) for L, n in zip(lengths, counts)]
        first = np.searchsorted(piece_line, np.arange(len(dists)))
        last = np.searchsorted(piece_line, np.arange(len(dists)), side="right") - 1
        looks = [
            flag[np.clip(np.searchsorted(run, d + run[a], side="right") - 1, a, b)]
            for d, a, b in zip(dists, first, last)
        ]
        return dists, np.concatenate(looks)

    kept = [x for x in kinds(hazard_board(tmp_path / "kept", edge_gap=edge_gap), "edge-run")]
    monkeypatch.setattr(edge_run, "kept_samples", keep_all)
    every = [x for x in kinds(hazard_board(tmp_path / "all", edge_gap=edge_gap), "edge-run")]
    assert kept and [x.as_dict() for x in kept] == [x.as_dict() for x in every]


def test_floating_island_resonance(tmp_path):
    f = kinds(hazard_board(tmp_path), "floating-copper")
    assert len(f) == 1 and f[0]["net"] == "SIG_C"
    assert f[0]["area_mm2"] == pytest.approx(100.0)
    # 20 x 5 mm patch, h 0.2, er 4.3 (REFERENCE 10 #28, Balanis / Hammerstad 1975): 3.710 GHz
    assert H == 0.2 and f[0]["resonance_GHz"] == pytest.approx(3.710, rel=5e-3)
    assert f[0]["stitching_vias_needed"] >= 2


def test_stitching_spacing_against_lambda_over_10(tmp_path):
    # lambda/10 at 1 GHz in er 4.4 is 14.3 mm (REFERENCE 6.2); on an outer pour eps_eff = (er + 1)/2
    # (common practice, no source): c / (1 GHz sqrt(2.7)) / 10 = 18.24 mm
    limit = 299.792458 / math.sqrt(2.7) / 10
    assert physics.wavelength_mm(1.0, 4.4) / 10 == pytest.approx(14.29, abs=0.01)
    f = [
        x
        for x in kinds(
            hazard_board(tmp_path, stitch_pitch=30.0, er=4.4), "stitching-spacing", max_freq_GHz=1.0
        )
        if x["layer"] == "L1"
    ]
    assert len(f) == 1
    assert f[0]["via_spacing_mm"] == pytest.approx(30.0) and f[0][
        "spacing_limit_mm"
    ] == pytest.approx(limit, rel=1e-6)
    ok = [
        x
        for x in kinds(
            hazard_board(tmp_path / "dense", stitch_pitch=8.0, er=4.4),
            "stitching-spacing",
            max_freq_GHz=1.0,
        )
        if x["layer"] == "L1"
    ]
    assert ok == []


def test_outer_slot_resonance_brackets_measurement(tmp_path):
    # a 24 x 1 mm slot in the outer plane of 0.2 mm FR-4: Svacina 1999's slotline permittivity
    # gives 5.76 GHz (er 4.3, REFERENCE 12); the half-wave lies between the board's er (2.9 GHz at
    # er 4.7) and air (6.25 GHz), near 4 GHz on thick boards (common practice, no source)
    from returngap.synth import SynthBoard, rect

    b = SynthBoard("o", 60, 40, n_layers=2, dielectrics=[(0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.5, 8, 30.5, 32)))
    b.tracks.append((1, "CLK", [(10, 20), (50, 20)], 0.2))
    b.write(tmp_path)
    f = [x for x in run_check(tmp_path).findings if x["kind"] == "gap-crossing"]
    assert len(f) == 1
    assert f[0]["resonance_GHz"] == pytest.approx(5.76, rel=0.08)
    lo, hi = f[0]["resonance_range_GHz"]
    assert lo < f[0]["resonance_GHz"] <= hi < 6.25
    assert lo == pytest.approx(2.88, rel=0.01)  # MoM, buried at er 4.3 (REFERENCE 12)
    assert hi == pytest.approx(5.76, rel=0.03)


def test_resonance_below_knee_raises_severity(tmp_path):
    from boards import slot_board

    slow = run_check(slot_board(tmp_path / "a", D=20), settings=Settings(rise_time_ns=2.0)).findings
    fast = run_check(slot_board(tmp_path / "b", D=20), settings=Settings(max_freq_GHz=5.0)).findings
    g = lambda fs: [x for x in fs if x["kind"] == "gap-crossing"][0]
    order = {"info": 0, "warning": 1, "error": 2}
    assert order[g(fast)["severity"]] > order[g(slow)["severity"]]


def test_return_split_two_branches(tmp_path):
    # slot D = 20 crossed so that the far way round is twice the near one:
    # near end 20/3 away, far end 40/3 away; equal widths -> the short branch carries 2/3 at
    # DC (Ohm's law)
    from boards import slot_board

    D = 20.0
    s = 0.5
    near = (D - s / 2) / 3  # so that 2 * far + s = 2 * (2 * near + s)
    crossing = kinds(slot_board(tmp_path, D=D, s=s, offset=D / 2 - near), "gap-crossing")
    assert len(crossing) == 1 and crossing[0]["return_path"] == "detour"
    f = [crossing[0]["return_split"]]  # the split is a field of its crossing, not a finding
    near, far = f[0]["branch_lengths_mm"]
    assert far / near == pytest.approx(2.0, rel=0.02)
    assert f[0]["dc_share_near"] == pytest.approx(far / (near + far), rel=1e-9)
    assert f[0]["dc_share_near"] == pytest.approx(2 / 3, rel=0.02)
    # inductance grows faster than length (l ln l): at high frequency even more goes the near way
    assert f[0]["hf_share_near"] > f[0]["dc_share_near"]
    # Rosa / Grover partial inductance (REFERENCE 10 #21 without the internal term): l = 10, r
    # = 0.1 -> 8.617 nH
    assert physics.wire_partial_inductance_nH(10, 0.1) == pytest.approx(8.617, rel=1e-3)
