"""Thin fixes for gerbonara 1.6.3 parser defects; each one is tested in
tests/test_gerbonara_compat.py.

Drop a fix once upstream behaves (the tests will say so).
"""

import copy

from gerbonara import rs274x

__all__ = ["apply"]

_applied = False


class _OpenBlock(list):
    """An open step-and-repeat block: truthy even when empty (gerbonara tests the list's truth)."""

    def __bool__(self):
        return True


def _snapshot_region_attrs(parser):
    region = parser.current_region
    if region is not None and not isinstance(region.__dict__.get("attrs"), dict):
        region.attrs = copy.copy(parser.graphics_state.object_attrs)


def apply():
    """Patch the parser in place; safe to call more than once."""
    global _applied
    if _applied:
        return
    P = rs274x.GerberParser
    orig_sr, orig_coord, orig_start, orig_end = (
        P._parse_step_repeat,
        P._parse_coord,
        P._parse_region_start,
        P._parse_region_end,
    )

    def parse_step_repeat(self, match):
        orig_sr(self, match)
        if self.step_repeat_objects is not None and not isinstance(
            self.step_repeat_objects, _OpenBlock
        ):
            self.step_repeat_objects = _OpenBlock(self.step_repeat_objects)

    def parse_coord(self, match):
        orig_coord(self, match)
        if self.current_region is not None:  # the common case (no region) costs one test
            _snapshot_region_attrs(self)

    def parse_region_start(self, match):
        orig_start(self, match)
        _snapshot_region_attrs(self)

    def parse_region_end(self, match):
        # Regions closed inside an SR block belong to the block, not straight to the file.
        if self.step_repeat_objects is not None and self.current_region:
            _snapshot_region_attrs(self)
            self.step_repeat_objects.append(self.current_region)
            self.current_region = None
            return
        orig_end(self, match)

    P._parse_step_repeat = parse_step_repeat
    P._parse_coord = parse_coord
    P._parse_region_start = parse_region_start
    P._parse_region_end = parse_region_end
    _applied = True
