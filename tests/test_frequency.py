"""The frequency view (physics/sparams.py, analysis/frequency.py): the track's insertion loss over a
gap, against scikit-rf's own line model, the series-inductance limit and the bench numbers."""

import json
import warnings

import numpy as np
import pytest
import skrf
from skrf.media import MLine

from returngap.physics import formulas as ph
from returngap.physics import sparams

warnings.filterwarnings("ignore")

ER, H, W = 4.5, 1.6, 3.0  # 1.6 mm FR4, a 50 ohm microstrip (Hammerstad & Jensen 1980)


def _slot_curves(l1, knee=1.0, d=24.0, s=1.0):
    freq = sparams.frequencies(knee)
    media = sparams.line_media(freq, W, H, ER)
    added = ph.slot_crossing_inductance_nH(l1, d - l1, s, W, H)[0]
    z = sparams.gap_impedance(freq.f, added, l1, d - l1, (ER + 1) / 2)
    element = sparams.series_network(freq, z)  # the track is 50 ohm: so are the ports
    with_gap, without = sparams.crossing_networks(media, 50.0, 50.0, element)
    return freq, with_gap, without, z, added, element


def test_the_line_without_a_gap_is_scikit_rf_s_microstrip():
    # scikit-rf's MLine (Hammerstad & Jensen, Kirschning & Jansen dispersion), one 100 mm piece
    # built here, against our two sections cascaded: within 0.05 dB at 1 GHz
    freq, _, without, _, _, _ = _slot_curves(12.0)
    ref = MLine(
        frequency=freq,
        z0_port=50,
        w=W * 1e-3,
        h=H * 1e-3,
        t=35e-6,
        ep_r=ER,
        tand=sparams.FR4_TAND,
        rho=sparams.COPPER_RHO,
        rough=0.0,
    ).line(100, "mm")
    at = int(np.argmin(abs(freq.f - 1e9)))
    ours = 20 * np.log10(abs(without.s[at, 1, 0]))
    theirs = 20 * np.log10(abs(ref.s[at, 1, 0]))
    assert ours == pytest.approx(theirs, abs=0.05)


@pytest.mark.parametrize("l1", [12.0, 5.0])
def test_gap_element_is_the_reported_inductance_at_low_frequency(l1):
    # series-inductance limit: Im Z / ω at 10 MHz equals the finding's added inductance (5 %)
    freq, _, _, z, added, _ = _slot_curves(l1)
    assert z[0].imag / (2 * np.pi * freq.f[0]) * 1e9 == pytest.approx(added, rel=0.05)


def test_bench_demonstration_24_mm_slot():
    # 10 cm 50 ohm line on 1.6 mm FR4 over a 24 mm slot crossed at its middle: first dip
    # between 2.9 and 6.3 GHz (near 4 GHz on the bench: common practice, no source), several dB
    # deep, under 0.5 dB at 1 GHz without the gap
    _, with_gap, without, _, _, element = _slot_curves(12.0)
    dip = sparams.first_dip_GHz(element)
    assert 2.9 <= dip <= 6.3
    assert sparams.loss_at_dB(with_gap, dip) >= 6.0
    assert sparams.loss_at_dB(without, 1.0) < 0.5


def test_a_slot_crossed_near_its_end_dips_higher():
    # stub lengths: near a shorted end the slot's first mode is barely excited (its voltage is
    # small there), so the first deep dip is a higher mode (Knorr 1974 stub model)
    mid = sparams.first_dip_GHz(_slot_curves(12.0, knee=3.0)[5])
    end = sparams.first_dip_GHz(_slot_curves(2.0, knee=3.0)[5])
    assert end is not None and end > 1.5 * mid


def test_a_lumped_inductance_has_no_dip():
    freq = sparams.frequencies(1.0)
    lumped = sparams.series_network(freq, 2j * np.pi * freq.f * 5e-9)
    assert sparams.first_dip_GHz(lumped) is None


@pytest.mark.parametrize("at_GHz", [0.005, 0.01, 1.0, 1.23456, 6.0, 9.0])
def test_the_loss_at_one_frequency_needs_only_the_two_points_beside_it(at_GHz):
    # the finding's loss at the knee is read off the curve by linear interpolation, which uses the
    # two points either side: the cascade built at those two alone gives the same number as the
    # whole 601-point curve (below the range, on a grid point, between two, above the range)
    freq, with_gap, _, _, _, element = _slot_curves(8.0)
    near = sparams.bracket(freq, at_GHz)
    assert near.stop - near.start == 2
    media = sparams.line_media(freq[near], W, H, ER)
    two, _ = sparams.crossing_networks(media, 50.0, 50.0, element[near])
    assert sparams.loss_at_dB(two, at_GHz) == pytest.approx(
        sparams.loss_at_dB(with_gap, at_GHz), rel=1e-9, abs=1e-12
    )


def test_demo_board_crossings_have_their_curves(tmp_path):
    # the demo board at 0.1 ns: every gap crossing is an error and carries the view's numbers;
    # a slot dips at its own resonance, the split (a lumped bound) has no dip
    from click.testing import CliRunner

    from conftest import ROOT
    from returngap.cli import main

    demo = ROOT / "examples" / "demo-board"
    out = tmp_path / "out"
    r = CliRunner().invoke(
        main,
        [
            "check",
            str(demo),
            "--stackup",
            str(demo / "stackup.toml"),
            "--rise-time",
            "0.1",
            "--out",
            str(out),
            "--fail-on",
            "never",
            "-q",
        ],
    )
    assert r.exit_code == 0, r.output
    rep = json.loads((out / "findings.json").read_text())
    crossings = [f for f in rep["findings"] if f["kind"] == "gap-crossing"]
    assert crossings
    for f in crossings:
        assert f["s21_loss_at_knee_dB"] > f["s21_loss_at_knee_no_gap_dB"]
        if f["gap_type"] == "slot":
            assert f["s21_first_dip_GHz"] == pytest.approx(f["resonance_GHz"], rel=0.05)
        net = skrf.Network(str(out / f"finding-{f['id']}.s2p"))
        assert net.nports == 2 and len(net.f) > 100
        assert (out / f"finding-{f['id']}-s_params.csv").read_text().startswith("f_GHz,")


def test_a_floating_island_dips_near_its_patch_resonance(tmp_path):
    # the island as a patch resonator coupled to the track: its dip lies just below the patch
    # frequency the finding reports (Hammerstad's fringing after Balanis), within 15 %, and the
    # island adds loss at the knee
    from boards import hazard_board
    from returngap.model.settings import Settings
    from returngap.run.pipeline import run_check

    r = run_check(
        hazard_board(tmp_path, stitch_pitch=8.0), settings=Settings(frequency_view="info")
    )
    [f] = [f for f in r.findings if f["kind"] == "floating-copper"]
    assert 0.85 * f["resonance_GHz"] <= f["s21_first_dip_GHz"] <= f["resonance_GHz"]
    assert f["s21_loss_at_knee_dB"] > f["s21_loss_at_knee_no_gap_dB"]
