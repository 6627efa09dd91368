"""The findings of known boards, field by field, against testdata/golden/ (`make golden` rewrites
them, on purpose only): a refactor that moves a number fails here."""

import json

import pytest

from golden import CORPUS, GOLDEN, cases, differences, frozen

CASES = cases()


@pytest.mark.parametrize("name", sorted(CASES))
def test_findings_match_the_golden_report(name):
    needs_corpus, make = CASES[name]
    if needs_corpus and not CORPUS.exists():
        pytest.skip("corpus board not present")
    want = json.loads((GOLDEN / f"{name}.json").read_text())
    diff = differences(want, frozen(make()))
    assert not diff, f"{name}: " + "; ".join(diff)


def test_the_comparison_can_fail():
    want = {"findings": [{"added_inductance_nH": 5.76, "net": "SPI_SCK"}]}
    assert (
        differences(want, {"findings": [{"added_inductance_nH": 5.7600001, "net": "SPI_SCK"}]})
        == []
    )
    assert differences(want, {"findings": [{"added_inductance_nH": 5.77, "net": "SPI_SCK"}]})
    assert differences(want, {"findings": []})
