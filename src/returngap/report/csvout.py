"""The findings report as CSV: one row per finding, the same fields as the JSON."""

__all__ = ["CSV_FIELDS", "to_csv", "s_params_csv"]


CSV_FIELDS = [
    "id",
    "kind",
    "gap_type",
    "severity",
    "status",
    "waived",
    "net",
    "layer",
    "reference_layer",
    "reference_net",
    "x_mm",
    "y_mm",
    "gap_length_mm",
    "gap_width_mm",
    "detour_mm",
    "detour_method",
    "interrupted_fraction",
    "added_inductance_nH",
    "added_inductance_low_nH",
    "added_inductance_high_nH",
    "inductance_method",
    "resonance_GHz",
    "message",
]


def to_csv(report):
    """One row per finding; numbers as in the JSON, empty cells for null."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=CSV_FIELDS, lineterminator="\n", extrasaction="ignore")
    w.writeheader()
    for f in report["findings"]:
        row = dict(f)
        lo, hi = f.get("added_inductance_range_nH") or (None, None)
        row["added_inductance_low_nH"], row["added_inductance_high_nH"] = lo, hi
        row["waived"] = "yes" if f.get("waiver") else ""
        row["status"] = f.get("status", "")
        w.writerow({k: ("" if row.get(k) is None else row.get(k)) for k in CSV_FIELDS})
    return buf.getvalue()


def s_params_csv(with_gap, without):
    """A crossing's curves (scikit-rf networks) as CSV: frequency, then S21 and S11 in dB with the
    gap and without it."""
    rows = ["f_GHz,s21_dB,s11_dB,s21_no_gap_dB,s11_no_gap_dB"]
    a, b = with_gap.s_db, without.s_db  # each computed once, not per row
    cols = (a[:, 1, 0], a[:, 0, 0], b[:, 1, 0], b[:, 0, 0])
    for k, f in enumerate(with_gap.frequency.f):
        rows.append(f"{f / 1e9:.6g}," + ",".join(f"{c[k]:.4f}" for c in cols))
    return "\n".join(rows) + "\n"
