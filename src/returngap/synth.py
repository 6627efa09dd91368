"""Writes small boards as real Gerber X2 and Excellon files, for the demo, tests and benchmarks.

Plain text output of our own; coordinates in mm with six decimals (%FSLAX46Y46%).
"""

import json
from dataclasses import dataclass, field
from pathlib import Path


def _c(v):
    return str(int(round(v * 1e6)))


def _esc(s):
    return (
        s.replace("\\", "\\u005C")
        .replace(",", "\\u002C")
        .replace("*", "\\u002A")
        .replace("%", "\\u0025")
    )


class GerberWriter:
    """Gerber X2 writer: apertures on demand, object attributes per object, polarity switches."""

    def __init__(self, file_function, polarity="Positive", generator="returngap-synth"):
        self.head = [
            f"%TF.GenerationSoftware,returngap,{generator},1*%",
            f"%TF.FileFunction,{file_function}*%",
            f"%TF.FilePolarity,{polarity}*%",
            "%FSLAX46Y46*%",
            "%MOMM*%",
            "G01*",
            "G75*",
        ]
        self.apertures = {}
        self.body = []
        self._dark = True
        self._attrs = None
        self._ap = None

    def _aperture(self, shape, params, function):
        key = (shape, params, function)
        if key not in self.apertures:
            code = 10 + len(self.apertures)
            self.apertures[key] = code
            txt = "X".join(f"{p:.6f}" for p in params)
            fn = f"%TA.AperFunction,{function}*%\n" if function else ""
            self.head.append(f"{fn}%ADD{code}{shape},{txt}*%" + ("\n%TD*%" if function else ""))
        return self.apertures[key]

    def _set(self, net=None, part=None, dark=True):
        if dark != self._dark:
            self.body.append("%LPD*%" if dark else "%LPC*%")
            self._dark = dark
        attrs = (net, part)
        if attrs != self._attrs:
            self.body.append("%TD*%")
            if net is not None:
                self.body.append(f"%TO.N,{_esc(net)}*%")
            if part is not None:
                self.body.append(f"%TO.P,{part[0]},{part[1]}*%")
            self._attrs = attrs

    def _use(self, code):
        if code != self._ap:
            self.body.append(f"D{code}*")
            self._ap = code

    def track(self, points, width, net=None, function="Conductor", dark=True):
        code = self._aperture("C", (width,), function)
        self._set(net, None, dark)
        self._use(code)
        (x0, y0), rest = points[0], points[1:]
        self.body.append(f"X{_c(x0)}Y{_c(y0)}D02*")
        for x, y in rest:
            self.body.append(f"X{_c(x)}Y{_c(y)}D01*")

    def flash(self, x, y, diameter, net=None, function="ViaPad", part=None, dark=True):
        code = self._aperture("C", (diameter,), function)
        self._set(net, part, dark)
        self._use(code)
        self.body.append(f"X{_c(x)}Y{_c(y)}D03*")

    def rect_flash(self, x, y, w, h, net=None, function="SMDPad,CuDef", part=None, dark=True):
        code = self._aperture("R", (w, h), function)
        self._set(net, part, dark)
        self._use(code)
        self.body.append(f"X{_c(x)}Y{_c(y)}D03*")

    def region(self, points, net=None, dark=True):
        self._set(net, None, dark)
        pts = list(points) + [points[0]]
        self.body.append("G36*")
        self.body.append(f"X{_c(pts[0][0])}Y{_c(pts[0][1])}D02*")
        for x, y in pts[1:]:
            self.body.append(f"X{_c(x)}Y{_c(y)}D01*")
        self.body.append("G37*")

    def text(self):
        return "\n".join(self.head + self.body + ["%TD*%", "M02*", ""])


def rect(x0, y0, x1, y1):
    return [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]


@dataclass
class Via:
    x: float
    y: float
    net: str
    drill: float = 0.3
    pad: float = 0.6
    antipad: float = 0.9


@dataclass
class SynthBoard:
    """A board of our own: tracks, vias, planes with cut-outs, written as a fabrication set."""

    name: str
    width: float
    height: float
    n_layers: int = 4
    tracks: list = field(default_factory=list)  # (layer, net, points, width)
    vias: list = field(default_factory=list)
    planes: list = field(default_factory=list)  # (layer, net, polygon points)
    cutouts: list = field(default_factory=list)  # (layer, polygon points) cleared from planes
    pads: list = field(default_factory=list)  # (layer, x, y, w, h, net, (ref, pin))
    dielectrics: list = field(default_factory=list)  # (thickness_mm, er), top to bottom
    er: float = 4.3

    def layer_function(self, n):
        side = "Top" if n == 1 else ("Bot" if n == self.n_layers else "Inr")
        kind = "Plane" if any(p[0] == n for p in self.planes) else "Signal"
        return f"Copper,L{n},{side},{kind}"

    def gerber(self, n):
        g = GerberWriter(self.layer_function(n))
        for layer, net, pts in self.planes:
            if layer == n:
                g.region(pts, net=net)
        plane_nets = {net for layer, net, _ in self.planes if layer == n}
        if plane_nets:
            for layer, pts in self.cutouts:
                if layer == n:
                    g.region(pts, dark=False)
            for v in self.vias:
                if v.net not in plane_nets:
                    g.flash(v.x, v.y, v.antipad, function="AntiPad", dark=False)
        for v in self.vias:
            if not plane_nets or v.net in plane_nets:
                g.flash(v.x, v.y, v.pad, net=v.net, function="ViaPad")
        for layer, x, y, w, h, net, part in self.pads:
            if layer == n:
                g.rect_flash(x, y, w, h, net=net, part=part)
        for layer, net, pts, width in self.tracks:
            if layer == n:
                g.track(pts, width, net=net)
        return g.text()

    def profile(self):
        g = GerberWriter("Profile,NP")
        g.track(rect(0, 0, self.width, self.height) + [(0, 0)], 0.1, function="Profile")
        return g.text()

    def drill(self):
        lines = [
            "M48",
            "; DRILL file returngap-synth",
            f"; #@! TF.FileFunction,Plated,1,{self.n_layers},PTH",
            "FMAT,2",
            "METRIC",
        ]
        tools = sorted({v.drill for v in self.vias})
        for i, d in enumerate(tools):
            lines.append("; #@! TA.AperFunction,Plated,PTH,ViaDrill")
            lines.append(f"T{i + 1}C{d:.3f}")
        lines += ["%", "G90", "G05"]
        for i, d in enumerate(tools):
            lines.append(f"T{i + 1}")
            lines += [f"X{v.x:.4f}Y{v.y:.4f}" for v in self.vias if v.drill == d]
        lines += ["M30", ""]
        return "\n".join(lines)

    def stackup_toml(self):
        out = [
            "# stackup of an invented board, written by returngap.synth",
            "board_thickness_mm = "
            f"{sum(t for t, _ in self.dielectrics) + 0.035 * self.n_layers:.4f}",
            "copper_thickness_mm = 0.035",
            "",
        ]
        for i, (t, er) in enumerate(self.dielectrics):
            out += [
                "[[dielectric]]",
                f'between = ["L{i + 1}", "L{i + 2}"]',
                f"thickness_mm = {t}",
                f"er = {er}",
                "",
            ]
        return "\n".join(out)

    def write(self, folder, job_file=True):
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        names = {}
        for n in range(1, self.n_layers + 1):
            fn = f"{self.name}-L{n}.gbr"
            (folder / fn).write_text(self.gerber(n))
            names[fn] = self.layer_function(n)
        (folder / f"{self.name}-profile.gbr").write_text(self.profile())
        names[f"{self.name}-profile.gbr"] = "Profile,NP"
        (folder / f"{self.name}.drl").write_text(self.drill())
        if not self.dielectrics:
            self.dielectrics = [(0.2, self.er)] * (self.n_layers - 1)
        (folder / "stackup.toml").write_text(self.stackup_toml())
        if job_file:
            stack = []
            for n in range(1, self.n_layers + 1):
                stack.append({"Type": "Copper", "Name": f"L{n}", "Thickness": 0.035})
                if n < self.n_layers:
                    t, er = self.dielectrics[n - 1]
                    stack.append(
                        {
                            "Type": "Dielectric",
                            "Name": f"D{n}",
                            "Thickness": t,
                            "DielectricConstant": er,
                        }
                    )
            job = {
                "Header": {
                    "GenerationSoftware": {
                        "Vendor": "returngap",
                        "Application": "synth",
                        "Version": "1",
                    }
                },
                "GeneralSpecs": {
                    "ProjectId": {"Name": self.name},
                    "LayerNumber": self.n_layers,
                    "BoardThickness": round(
                        sum(t for t, _ in self.dielectrics) + 0.035 * self.n_layers, 4
                    ),
                },
                "FilesAttributes": [
                    {"Path": k, "FileFunction": v, "FilePolarity": "Positive"}
                    for k, v in names.items()
                ],
                "MaterialStackup": stack,
            }
            (folder / f"{self.name}.gbrjob").write_text(json.dumps(job, indent=1))
        return folder
