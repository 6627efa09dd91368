"""Which copper layers a drill file spans, from the files beside it.

A layer-pair file (one line per drill file:
`LayersSetName=...|DrillFile=name|DrillLayers=gtl,g1,...`)
names the copper layers by their file extensions; a drill report names each drill file under a
`Layer Pair : <from> to <to>` heading, with layers as Top, Bottom or L<n>. Drill file names are
matched case-insensitively (writers give them in another case than the files carry).
"""

import re
from pathlib import PurePosixPath

__all__ = [
    "drill_span",
    "side_files",
    "is_layer_pairs",
    "is_drill_report",
    "read_layer_pairs",
    "read_drill_report",
    "span_from_tokens",
    "span_from_names",
]

LDP_LINE_RE = re.compile(r"DrillFile=([^|\r\n]+)\|DrillLayers=([^|\r\n]+)", re.I)
DRR_PAIR_RE = re.compile(r"^\s*Layer Pair\s*:\s*(.+?)\s+to\s+(.+?)\s*$", re.I | re.M)
DRR_FILE_RE = re.compile(r"^\s*ASCII\s+\w+\s+File\s*:\s*(\S.*?)\s*$", re.I | re.M)


def is_layer_pairs(text):
    return bool(LDP_LINE_RE.search(text))


def is_drill_report(text):
    return bool(DRR_PAIR_RE.search(text)) and bool(DRR_FILE_RE.search(text))


def _key(name):
    return PurePosixPath(name.strip().replace("\\", "/")).name.lower()


def read_layer_pairs(text):
    """{drill file name, lower case: [layer tokens, lower case]}."""
    return {
        _key(m.group(1)): [t.strip().lower() for t in m.group(2).split(",") if t.strip()]
        for m in LDP_LINE_RE.finditer(text)
    }


def read_drill_report(text):
    """{drill file name, lower case: (from layer name, to layer name)}: each file under the last
    layer-pair heading before it."""
    pairs = [(m.start(), m.group(1), m.group(2)) for m in DRR_PAIR_RE.finditer(text)]
    out = {}
    for m in DRR_FILE_RE.finditer(text):
        before = [p for p in pairs if p[0] < m.start()]
        if before:
            out[_key(m.group(1))] = (before[-1][1], before[-1][2])
    return out


def span_from_tokens(tokens, copper_by_suffix):
    """(from, to) layer numbers from extension tokens; copper_by_suffix: {'.gtl': 1, ...}.
    None when a token names no copper file."""
    nums = [copper_by_suffix.get("." + t.lstrip(".")) for t in tokens]
    if not nums or any(n is None for n in nums):
        return None
    return min(nums), max(nums)


def _layer_number(name, n_layers):
    low = name.strip().lower()
    if low in ("top", "top layer"):
        return 1
    if low in ("bottom", "bottom layer"):
        return n_layers
    m = re.fullmatch(r"l(?:ayer)?\s*(\d+)", low)
    return int(m.group(1)) if m and 1 <= int(m.group(1)) <= n_layers else None


def span_from_names(pair, n_layers):
    a, b = (_layer_number(x, n_layers) for x in pair)
    return None if a is None or b is None else (min(a, b), max(a, b))


def drill_span(name, role, n_layers, side_files):
    """(from, to) and where it came from: the user or the file's own attribute, the layer-pair file,
    the drill report, the file name; else a through hole, stated."""
    if role.span:
        return role.span, role.source
    key = PurePosixPath(name).name.lower()
    tokens = side_files["layer pairs"].get(key)
    if tokens:
        span = span_from_tokens(tokens, side_files["suffix"])
        if span:
            return span, f"layer-pair file {side_files['layer pairs file']}"
    pair = side_files["report"].get(key)
    if pair:
        span = span_from_names(pair, n_layers)
        if span:
            return span, f"drill report {side_files['report file']}"
    m = re.search(r"[-_]L?(\d+)[-_]L?(\d+)\.\w+$", PurePosixPath(name).name, re.I)
    if m and 1 <= int(m.group(1)) < int(m.group(2)) <= n_layers:
        return (int(m.group(1)), int(m.group(2))), "file name"
    return (1, n_layers), "assumed (through hole)"


def side_files(bf, texts, layers):
    out = {
        "layer pairs": {},
        "report": {},
        "layer pairs file": None,
        "report file": None,
        "suffix": {
            PurePosixPath(c.file).suffix.lower(): int(c.name[1:]) for c in layers if not c.missing
        },
    }
    for f in bf.fab:
        if f.kind == "layerpairs":
            out["layer pairs"].update(read_layer_pairs(texts[f.name]))
            out["layer pairs file"] = f.name
        elif f.kind == "drillreport":
            out["report"].update(read_drill_report(texts[f.name]))
            out["report file"] = f.name
    return out
