"""The findings report as SARIF 2.1.0 (OASIS Static Analysis Results Interchange Format), which
code hosts and CI systems display: one result per finding, its file the Gerber of the layer the
finding is about (the reference plane's, for a gap), its logical location the net; waived findings
carry a suppression, and a baseline's word is SARIF's baselineState."""

from returngap import __version__
from returngap.report.core import DISCLAIMER

__all__ = ["to_sarif", "SARIF_SCHEMA_URI"]

SARIF_SCHEMA_URI = "https://json.schemastore.org/sarif-2.1.0.json"
_LEVEL = {"error": "error", "warning": "warning", "info": "note"}
_RULES = {
    "gap-crossing": "A signal's return crosses or runs beside a slot, split or void in its plane.",
    "reference-change": "A signal via whose two track layers return in different planes.",
    "edge-run": "A track runs near, or off, the edge of its reference plane.",
    "floating-copper": "Copper with no connection near a signal track.",
    "stitching-spacing": "Stitching vias of a plane too far apart for the frequency of interest.",
    "net-conflict": "Copper that carries two nets' labels.",
}
_NUMBERS = (
    "x_mm",
    "y_mm",
    "layer",
    "reference_layer",
    "reference_net",
    "gap_type",
    "added_inductance_nH",
    "reflection_fraction",
    "resonance_GHz",
    "detour_mm",
)


def _files(report):
    return {c["name"]: c.get("file") for c in report["board"].get("copper_layers", [])}


def _result(f, files):
    layer = f.get("reference_layer") or f["layer"]
    location = {
        "logicalLocations": [{"name": f["net"], "kind": "net"}],
    }
    if files.get(layer):
        location["physicalLocation"] = {"artifactLocation": {"uri": files[layer]}}
    out = {
        "ruleId": f["kind"],
        "level": _LEVEL[f["severity"]],
        "message": {"text": f["message"]},
        "locations": [location],
        "partialFingerprints": {"returngapFindingId/v1": f["id"]},
        "properties": {k: f[k] for k in _NUMBERS if f.get(k) is not None},
    }
    if f.get("waiver"):
        w = f["waiver"]
        out["suppressions"] = [
            {"kind": "external", "justification": f"{w.get('by')}: {w.get('reason')}"}
        ]
    if f.get("status") in ("new", "unchanged"):
        out["baselineState"] = f["status"]
    return out


def to_sarif(report):
    """The report as a SARIF 2.1.0 log (a mapping; report.to_json writes it)."""
    files = _files(report)
    rules = [{"id": k, "shortDescription": {"text": t}} for k, t in _RULES.items()]
    run = {
        "tool": {"driver": {"name": "returngap", "version": __version__, "rules": rules}},
        "results": [_result(f, files) for f in report["findings"]],
        "properties": {
            "board": report["board"]["name"],
            "status": report["summary"].get("status", "complete"),
            "disclaimer": DISCLAIMER,
        },
    }
    return {"$schema": SARIF_SCHEMA_URI, "version": "2.1.0", "runs": [run]}
