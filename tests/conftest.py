import warnings
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT.parent / "shared" / "corpus"
TESTDATA = ROOT / "testdata"

warnings.filterwarnings("ignore")


def gerber(body, fs="%FSLAX46Y46*%\n%MOMM*%", attrs="%TF.FileFunction,Copper,L1,Top*%"):
    """A small Gerber file around a body of our own."""
    return f"{attrs}\n{fs}\nG01*\n{body}\nM02*\n"


@pytest.fixture
def write(tmp_path):
    def _write(name, text):
        p = tmp_path / name
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text)
        return p

    return _write


def corpus_board(slug):
    p = CORPUS / slug
    if not p.exists():
        pytest.skip(f"corpus board {slug} not present (../shared/corpus is outside a fresh clone)")
    return p
