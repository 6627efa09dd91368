"""Which file is which: the role of every Gerber and Excellon file, from the user's
[layers] mapping, the file's own X2 attribute, the job file or the file name, and the copper
layers' numbers."""

import re
import warnings
from dataclasses import dataclass
from pathlib import PurePosixPath

from gerbonara.layers import _best_match

from returngap.errors import InputError
from returngap.io import compat  # noqa: F401  (gerbonara fixed before any parse)

__all__ = [
    "X2_FUNC_RE",
    "X2_POL_RE",
    "Role",
    "role_from_function",
    "role_from_user",
    "role_from_name",
    "NameRoles",
    "identify",
    "number_copper",
    "job_file_roles",
]

X2_FUNC_RE = re.compile(r"(?:%TF|G04 #@! TF|; #@! TF)\.FileFunction,([^*%\r\n]*)")


X2_POL_RE = re.compile(r"(?:%TF|G04 #@! TF|; #@! TF)\.FilePolarity,(\w+)")


@dataclass
class Role:
    kind: str  # copper | profile | drill | other
    number: int | None = None  # copper: 1-based from the top, when the source gives it
    order_key: float | None = None
    side: str | None = None
    polarity: str = "positive"
    type_hint: str | None = None
    plated: bool | None = None
    span: tuple | None = None
    source: str = ""
    label: str = ""


def role_from_function(func, polarity=None, source=""):
    """Role from a .FileFunction value (X2 file attribute or job-file entry)."""
    f = [p.strip() for p in func.split(",")]
    pol = (polarity or "positive").lower()
    head = f[0].lower()
    if head == "copper" and len(f) >= 3 and re.fullmatch(r"L\d+", f[1]):
        side = {"top": "top", "inr": "inner", "bot": "bottom"}.get(f[2].lower(), "inner")
        return Role(
            "copper",
            number=int(f[1][1:]),
            side=side,
            polarity=pol,
            type_hint=f[3] if len(f) > 3 else None,
            source=source,
            label=func,
        )
    if head in ("plated", "nonplated", "mixedplating"):
        span = None
        if len(f) >= 3 and f[1].isdigit() and f[2].isdigit():
            span = (int(f[1]), int(f[2]))
        # MixedPlating: plated and non-plated holes in one file, told apart per tool
        plated = {"plated": True, "nonplated": False}.get(head)
        return Role("drill", plated=plated, span=span, source=source, label=func)
    if head in ("profile", "keepout"):
        return Role("profile", source=source, label=func)
    return Role("other", source=source, label=func)


def role_from_user(value, source="stackup file"):
    v = str(value).strip()
    low = v.lower()
    if re.fullmatch(r"l\d+", low):
        return Role("copper", number=int(low[1:]), source=source, label=v)
    if low in ("profile", "outline"):
        return Role("profile", source=source, label=v)
    if low.startswith("drill"):
        plated = (
            None if low in ("drill", "drill:unknown") else not ("npth" in low or "nonplated" in low)
        )
        m = re.search(r"(\d+)-(\d+)", low)
        return Role(
            "drill",
            plated=plated,
            span=(int(m.group(1)), int(m.group(2))) if m else None,
            source=source,
            label=v,
        )
    if low in ("ignore", "other"):
        return Role("other", source=source, label=v)
    raise InputError(
        source,
        f"unknown layer role {value!r} (use L<n>, profile, drill, drill:npth, drill:<a>-<b>, "
        "ignore)",
    )


def role_from_name(key):
    """Role from gerbonara's file-name recognition key, e.g. 'inner_2 copper'."""
    side, _, use = key.partition(" ")
    if use == "copper":
        if side == "top":
            return Role("copper", order_key=0, side="top", source="file name", label=key)
        if side == "bottom":
            return Role("copper", order_key=1e9, side="bottom", source="file name", label=key)
        m = re.match(r"inner_(\d+)", side)
        return Role(
            "copper",
            order_key=int(m.group(1)) if m else 5e8,
            side="inner",
            source="file name",
            label=key,
        )
    if use == "outline":
        return Role("profile", source="file name", label=key)
    if side == "drill":
        plated = {"plated": True, "nonplated": False}.get(use)
        return Role("drill", plated=plated, source="file name", label=key)
    return Role("other", source="file name", label=key)


class NameRoles:
    """Roles from file names, matched over all files together, only when something asks (the
    matching rules are many regular expressions)."""

    def __init__(self, files):
        self._files = files
        self._roles = None

    def get(self, name):
        if self._roles is None:
            self._roles = {}
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    _gen, guessed = _best_match([p for _, p in self._files])
                except Exception:
                    guessed = {}
            by_path = {p: n for n, p in self._files}
            for key, paths in guessed.items():
                for p in paths:
                    if p in by_path:
                        self._roles[by_path[p]] = role_from_name(key)
        return self._roles.get(name)


def _disagrees(a, b):
    """Two statements about one file that cannot both hold (unstated numbers or spans agree)."""
    if a.kind != b.kind:
        return True
    return any(
        x is not None and y is not None and x != y
        for x, y in ((a.number, b.number), (a.span, b.span))
    )


def _own_role(f, text):
    x2 = X2_FUNC_RE.search(text)
    if not x2:
        return None
    pol = X2_POL_RE.search(text)
    return role_from_function(x2.group(1), pol.group(1) if pol else None, "X2 attribute")


def identify(board_files, texts, job, user_layers, names=None):
    """Role of every Gerber and Excellon file; returns ({name: Role}, [assumption, ...]).
    Trust: the user's [layers] mapping (an explicit statement about this board), then the file's
    own X2 attribute, the job file's FilesAttributes, the file name. A user mapping that leaves a
    drill's span or plating unsaid takes them from the file's own attribute."""
    notes = []
    roles = {}
    job_roles = job_file_roles(job)
    candidates = [f for f in board_files.fab if f.kind in ("gerber", "excellon")]
    names = names or NameRoles([(f.name, f.path) for f in candidates])
    user_roles = {k: role_from_user(v) for k, v in (user_layers or {}).items()}
    for f in candidates:
        base = PurePosixPath(f.name).name
        own = _own_role(f, texts[f.name])
        ranked = [
            r
            for r in (user_roles.get(f.name) or user_roles.get(base), own, job_roles.get(base))
            if r is not None
        ]
        chosen = ranked[0] if ranked else None
        for other in ranked[1:]:
            if _disagrees(other, chosen):
                notes.append(
                    f"{f.name}: {other.source} says '{other.label}', the {chosen.source} says "
                    f"'{chosen.label}'; using the {chosen.source}"
                )
        if (
            chosen is not None
            and chosen.kind == "drill"
            and own is not None
            and own.kind == "drill"
        ):
            chosen.span = chosen.span or own.span
            chosen.plated = (
                own.plated if chosen.plated is None and chosen is not own else chosen.plated
            )
        if chosen is None:
            chosen = names.get(f.name)
        if chosen is None and f.kind == "excellon":
            chosen = Role("drill", source="content")
        if chosen is None:
            chosen = Role("other", source="unrecognised", label="unrecognised")
        if chosen.kind == "drill" and f.kind != "excellon":
            chosen = Role("other", source=chosen.source, label=chosen.label)
        if chosen.kind in ("copper", "profile") and f.kind != "gerber":
            chosen = Role("other", source=chosen.source, label=chosen.label)
        if (
            f.kind == "gerber"
            and chosen.kind == "copper"
            and re.search(r"%IPNEG\*%", texts[f.name])
        ):
            chosen.polarity = "negative"
        roles[f.name] = chosen
    return roles, notes


def _name_number(role, last_inner):
    """Layer number from a file-name role: top 1, inner_k k + 1, bottom after the last inner."""
    if role.side == "top":
        return 1
    if role.side == "bottom":
        return last_inner + 2
    return int(role.order_key) + 1


def number_copper(roles, name_inners=None):
    """Copper files in order, top to bottom, as [(file name, Role)], each Role numbered. Numbers the
    files state (X2, job file, user) are kept, gaps and all, so that a missing layer shows as one;
    file-name roles are numbered from their inner index when the names of all files, unreadable
    ones included (name_inners), give inner indices 1..k with none left out; else in order."""
    copper = [(n, r) for n, r in roles.items() if r.kind == "copper"]
    if not copper:
        return []
    if all(r.number is not None for _, r in copper):
        copper.sort(key=lambda nr: nr[1].number)
        nums = [r.number for _, r in copper]
        if len(set(nums)) != len(nums):
            dup = sorted({x for x in nums if nums.count(x) > 1})
            raise InputError(copper[0][0], f"two copper files claim layer L{dup[0]}")
        return copper
    inners = sorted(name_inners or ())
    by_name = (
        name_inners is not None
        and inners == list(range(1, len(inners) + 1))
        and all(
            r.source == "file name" and (r.side != "inner" or float(r.order_key).is_integer())
            for _, r in copper
        )
    )
    if by_name:
        for _, r in copper:
            r.number = _name_number(r, len(inners))
        copper.sort(key=lambda nr: nr[1].number)
        if len({r.number for _, r in copper}) == len(copper):
            return copper
    copper.sort(key=lambda nr: nr[1].number * 1e6 if nr[1].number is not None else nr[1].order_key)
    for i, (_, r) in enumerate(copper):
        r.number = i + 1
    return copper


def job_file_roles(job):
    """{file base name: Role} from a job file's FilesAttributes."""
    out = {}
    for entry in (job.get("FilesAttributes") or []) if isinstance(job, dict) else []:
        if isinstance(entry, dict) and entry.get("Path") and entry.get("FileFunction"):
            out[PurePosixPath(str(entry["Path"]).replace("\\", "/")).name] = role_from_function(
                str(entry["FileFunction"]), entry.get("FilePolarity"), "job file"
            )
    return out
