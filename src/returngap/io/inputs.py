"""Board input: a folder, a zip archive or a list of files -> the fabrication files in it.

Archives are unpacked only into a private temporary folder, with limits against
path traversal, links, encrypted members and zip bombs.
"""

import os
import re
import shutil
import stat
import tempfile
import zipfile
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from returngap.errors import InputError
from returngap.io import drillspans

__all__ = [
    "MAX_MEMBERS",
    "MAX_TOTAL_BYTES",
    "MAX_RATIO",
    "SNIFF_BYTES",
    "JUNK_NAMES",
    "NON_FAB_SUFFIXES",
    "FabFile",
    "unpack_zip",
    "is_fab_candidate",
    "sniff",
    "why_not",
    "BoardFiles",
]

MAX_MEMBERS = 5000
MAX_TOTAL_BYTES = 1 << 30  # expanded size of one archive
MAX_RATIO = 200  # expanded / compressed, per member
SNIFF_BYTES = 65536

JUNK_NAMES = {".ds_store", "thumbs.db", "desktop.ini"}
NON_FAB_SUFFIXES = {
    ".pdf",
    ".png",
    ".jpg",
    ".jpeg",
    ".bmp",
    ".svg",
    ".csv",
    ".xls",
    ".xlsx",
    ".doc",
    ".docx",
    ".html",
    ".htm",
    ".md",
    ".pos",
    ".step",
    ".stp",
    ".kicad_pcb",
    ".sch",
    ".brd",
    ".zip",
    ".7z",
    ".rar",
    ".py",
    ".json_",
    ".log",
    ".toml",
}


@dataclass
class FabFile:
    name: str  # path relative to the board root, for messages and reports
    path: Path  # where it can be read
    kind: str  # gerber | excellon | job | ipc356 | layerpairs | drillreport


def _safe_member_name(info):
    name = info.filename.replace("\\", "/")
    p = PurePosixPath(name)
    if name.startswith("/") or re.match(r"^[A-Za-z]:", name) or ".." in p.parts:
        return None
    return name


def unpack_zip(archive, dest):
    """Unpack an archive into dest, refusing anything unsafe; returns dest."""
    try:
        zf = zipfile.ZipFile(archive)
    except (zipfile.BadZipFile, OSError, ValueError) as e:
        raise InputError(archive, f"not a readable zip archive ({e})") from None
    with zf:
        infos = zf.infolist()
        if len(infos) > MAX_MEMBERS:
            raise InputError(archive, f"archive has {len(infos)} members (limit {MAX_MEMBERS})")
        total = 0
        for info in infos:
            name = _safe_member_name(info)
            if name is None:
                raise InputError(
                    archive,
                    f"unsafe member path {info.filename!r} (absolute or outside the archive)",
                )
            if info.flag_bits & 0x1:
                raise InputError(archive, f"encrypted member {info.filename!r}")
            mode = (info.external_attr >> 16) & 0o170000
            if mode == stat.S_IFLNK:
                raise InputError(archive, f"symbolic link member {info.filename!r}")
            total += info.file_size
            if total > MAX_TOTAL_BYTES:
                raise InputError(
                    archive, f"expands beyond {MAX_TOTAL_BYTES >> 20} MiB (possible zip bomb)"
                )
            if (
                info.compress_size
                and info.file_size / info.compress_size > MAX_RATIO
                and info.file_size > (1 << 20)
            ):
                raise InputError(
                    archive,
                    f"member {info.filename!r} compresses {info.file_size // info.compress_size}:1"
                    " (possible zip bomb)",
                )
        root = Path(dest).resolve()
        for info in infos:
            if info.is_dir():
                continue
            target = (root / _safe_member_name(info)).resolve()
            if root not in target.parents:
                raise InputError(archive, f"unsafe member path {info.filename!r}")
            target.parent.mkdir(parents=True, exist_ok=True)
            written = 0
            try:
                with zf.open(info) as src, open(target, "wb") as out:
                    while chunk := src.read(1 << 20):
                        written += len(chunk)
                        if written > info.file_size + 1024:
                            raise InputError(
                                archive, f"member {info.filename!r} is larger than its header says"
                            )
                        out.write(chunk)
            except (zipfile.BadZipFile, EOFError, OSError, ValueError, NotImplementedError) as e:
                raise InputError(archive, f"member {info.filename!r} is corrupt ({e})") from None
    return dest


def is_fab_candidate(path):
    """Not ignored by name (metadata, documents) before its content is looked at."""
    name = path.name.lower()
    return not (
        name in JUNK_NAMES
        or name.startswith("._")
        or (path.suffix.lower() in NON_FAB_SUFFIXES and path.suffix.lower() != ".gbrjob")
    )


def sniff(path):
    """Which fabrication format a file holds, from its content; None when it is none of them."""
    try:
        with open(path, "rb") as f:
            head = f.read(SNIFF_BYTES)
    except OSError:
        return None
    if not head or b"\x00" in head[:4096]:
        return None
    text = head.decode("latin-1")
    stripped = text.lstrip("\ufeff \t\r\n")
    if stripped.startswith("{") and (
        '"FilesAttributes"' in text or '"GeneralSpecs"' in text or '"Header"' in text
    ):
        return "job"
    if "%TF.FileFunction,JobInfo" in text:
        return "job"
    if re.search(r"^P\s+UNITS\s+CUST|^P\s+JOB\b", text, re.M) and re.search(
        r"^3[0-9]{2}", text, re.M
    ):
        return "ipc356"
    if re.search(r"^\s*(?:G0?4[^\n]*\*\s*)?%FS[LTD]?[AI]?X\d\dY\d\d", text, re.M) or re.search(
        r"^\s*%MO(MM|IN)\*%", text, re.M
    ):
        return "gerber"
    if re.search(r"^\s*M48\s*$", text, re.M) or (
        re.search(r"^(METRIC|INCH)\b", text, re.M) and re.search(r"^T\d+C[\d.]+", text, re.M)
    ):
        return "excellon"
    if re.search(r"^G04 .*\*\s*$", text, re.M) and re.search(r"D0?[123]\*", text):
        return "gerber"
    if re.search(r"^T\d+\s*$", text, re.M) and re.search(
        r"^X[+-]?[\d.]+Y[+-]?[\d.]+\s*$", text, re.M
    ):
        return "excellon-headerless"
    if drillspans.is_layer_pairs(text):
        return "layerpairs"
    if drillspans.is_drill_report(text):
        return "drillreport"
    return None


def why_not(path):
    """Why a file is not fabrication data, in a few words."""
    try:
        head = open(path, "rb").read(4096)
    except OSError as e:
        return f"cannot read ({e.strerror})"
    if not head.strip():
        return "empty file"
    if b"\x00" in head:
        return "binary data, not Gerber or Excellon"
    return "not Gerber, Excellon, job file or IPC-D-356"


def _refuse_repeats(sources):
    """The same folder or file named twice is a slip of the command line, said as such."""
    seen = {}
    for s in sources:
        key = s.resolve()
        if key in seen:
            raise InputError(s, f"given twice (as {seen[key]} and {s}): name each input once")
        seen[key] = s


class BoardFiles:
    """The fabrication files of one board, and what was ignored; owns any temporary folder."""

    def __init__(self, sources, scratch=None):
        """scratch: folder for unpacking archives (a private temporary folder inside it)."""
        self._tmp = None
        self.fab = []
        self.ignored = []
        sources = [
            Path(s) for s in ([sources] if isinstance(sources, (str, os.PathLike)) else sources)
        ]
        if not sources:
            raise InputError("<board>", "no input given")
        _refuse_repeats(sources)
        if len(sources) == 1 and sources[0].is_dir():
            self.name = sources[0].resolve().name
            self.source = str(sources[0])
            self._scan_dir(sources[0])
        elif len(sources) == 1 and sources[0].suffix.lower() == ".zip":
            self.name = sources[0].stem
            self.source = str(sources[0])
            if not sources[0].is_file():
                raise InputError(sources[0], "no such file")
            self._tmp = tempfile.mkdtemp(prefix="returngap-", dir=scratch)
            self._owner = os.getpid()
            try:
                unpack_zip(sources[0], self._tmp)
                self._scan_dir(Path(self._tmp))
            except BaseException:
                self.close()
                raise
        else:
            self.name = sources[0].resolve().parent.name
            self.source = ", ".join(str(s) for s in sources)
            for s in sources:
                if s.is_dir():
                    raise InputError(s, "a folder among several inputs: give one folder, or files")
                if not s.is_file():
                    raise InputError(s, "no such file")
                self._consider(s, s.name)
        if not self.fab:
            self.close()
            ignored = "; ".join(f"{i['file']} ({i['reason']})" for i in self.ignored[:5])
            more = f" and {len(self.ignored) - 5} more" if len(self.ignored) > 5 else ""
            why = f"; ignored: {ignored}{more}" if self.ignored else ""
            raise InputError(self.source, f"no fabrication data found (Gerber, Excellon){why}")

    def _scan_dir(self, root):
        for dirpath, dirnames, filenames in os.walk(root, followlinks=False):
            dirnames.sort()
            for fn in sorted(filenames):
                p = Path(dirpath) / fn
                rel = p.relative_to(root).as_posix()
                self._consider(p, rel)

    def _consider(self, path, rel):
        parts = rel.lower().split("/")
        if "__macosx" in parts or parts[-1] in JUNK_NAMES or parts[-1].startswith("._"):
            self.ignored.append({"file": rel, "reason": "operating-system metadata"})
            return
        if path.is_symlink():
            self.ignored.append({"file": rel, "reason": "symbolic link not followed"})
            return
        if path.suffix.lower() in NON_FAB_SUFFIXES and path.suffix.lower() != ".gbrjob":
            self.ignored.append(
                {"file": rel, "reason": f"not fabrication data ({path.suffix.lower()})"}
            )
            return
        kind = sniff(path)
        if kind == "excellon-headerless":
            raise InputError(
                rel,
                "drill file has no M48 header: its units, number format and tool sizes are unknown",
            )
        if kind is None:
            self.ignored.append({"file": rel, "reason": why_not(path)})
            return
        self.fab.append(FabFile(rel, path, kind))

    def close(self):
        if self._tmp and os.getpid() == self._owner:  # a forked process leaves it to its parent
            shutil.rmtree(self._tmp, ignore_errors=True)
            self._tmp = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
