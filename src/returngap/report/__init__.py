"""Reports: data and JSON (core), terminal text, CSV (csvout), JUnit XML (junit), the HTML page
(htmlpage), pictures (render), waivers and baseline (review). The names callers use are here."""

from returngap.report.core import *  # noqa: F403
from returngap.report.core import DISCLAIMER, FAIL_LEVELS, SEVERITY_ORDER  # noqa: F401
from returngap.report.csvout import *  # noqa: F403
from returngap.report.junit import *  # noqa: F403
from returngap.report.sarif import *  # noqa: F403
from returngap.report.text import *  # noqa: F403
