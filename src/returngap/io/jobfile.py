"""The Gerber job file (JSON): its FilesAttributes and MaterialStackup."""

import json

from returngap.errors import InputError

__all__ = ["read_text", "parse_job_file"]


def read_text(fab):
    try:
        return fab.path.read_bytes().decode("latin-1")
    except OSError as e:
        raise InputError(fab.name, f"cannot read ({e.strerror})") from None


def parse_job_file(fab, text):
    """FilesAttributes and MaterialStackup of a JSON job file (legacy %TJ job files carry
    neither)."""
    if text.lstrip("\ufeff \t\r\n").startswith("{"):
        try:
            data = json.loads(text.lstrip("\ufeff"))
        except json.JSONDecodeError as e:
            raise InputError(fab.name, f"job file is not valid JSON ({e.msg})", e.lineno) from None
        if not isinstance(data, dict):
            raise InputError(fab.name, "job file is not a JSON object")
        return data
    return {}
