"""Reports: JSON, CSV, JUnit, text (core.py, re-exported here), HTML, pictures, waivers."""

from returngap.report.core import *  # noqa: F403
from returngap.report.core import DISCLAIMER, FAIL_LEVELS, SEVERITY_ORDER  # noqa: F401
