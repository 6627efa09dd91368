"""IPC-D-356(A) netlists -> net test points."""

import re

from returngap.errors import InputError
from returngap.io.gerber import unescape_net
from returngap.model.board import NetPoint

__all__ = ["IPC_UNITS", "parse_netlist"]

IPC_UNITS = {"CUST 0": 0.0001 * 25.4, "CUST 1": 0.001, "CUST 2": 0.0001 * 25.4, "SI": 0.001}


def parse_netlist(fab):
    """IPC-D-356(A) test records (op codes 3xx) -> NetPoints in mm; fixed columns as KiCad and
    Allegro write them: net 4-17, refdes 21-26, '-' 27, pin 28-31, 'M' 32 (mid-point / via)."""
    try:
        text = fab.path.read_bytes().decode("latin-1")
    except OSError as e:
        raise InputError(fab.name, f"cannot read ({e.strerror})") from None
    scale = IPC_UNITS["CUST 0"]
    pts = []
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.rstrip("\r")
        if line.startswith("P  UNITS"):
            unit = " ".join(line[8:].split())
            scale = next((v for k, v in IPC_UNITS.items() if unit.startswith(k)), None)
            if scale is None:
                raise InputError(fab.name, f"unknown IPC-D-356 units {unit!r}", lineno)
            continue
        if not re.match(r"3[0-9]{2}", line[:3]):
            continue
        net = line[3:17].strip()
        m = re.search(r"X([+-]?\d+)Y([+-]?\d+)", line[40:])
        if not net or net == "N/C" or not m:
            continue
        refdes = line[20:26].strip() or None
        pin = line[27:31].strip() if len(line) > 27 and line[26:27] == "-" else None
        is_via = refdes == "VIA" or line[31:32] == "M"
        # access side, columns 39-41: A00 both sides, A01 the top, A<n> layer n (the bottom)
        acc = re.match(r"A(\d\d)", line[38:41])
        side = int(acc.group(1)) if acc and int(acc.group(1)) > 0 else None
        pts.append(
            NetPoint(
                net=unescape_net(net),
                x=int(m.group(1)) * scale,
                y=int(m.group(2)) * scale,
                refdes=refdes,
                pin=pin or None,
                is_via=is_via,
                layers=(side, side) if side else None,
            )
        )
    return pts
