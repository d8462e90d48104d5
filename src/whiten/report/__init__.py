"""One-file HTML reports: what was run, the answer first, how far to trust it, cautions.

Build a :class:`Report` by hand, or with a builder per job
(:func:`monitoring_report`, ...), then ``.write("report.html")``. The file is
self-contained (inline CSS, pictures as PNG data URIs, no scripts, nothing
fetched), prints cleanly and reads at phone width.
"""

from .document import (
                       CAUTION_CALIBRATION,
                       CAUTION_SCREEN,
                       Bullets,
                       Figure,
                       KeyFigure,
                       Paragraph,
                       Report,
                       Section,
                       Table,
                       TrustLine,
                       format_number,
)
from .likelihood import calibration_report, likelihood_report, likelihood_rows
from .monitoring import monitoring_report, worst_rows
from .provenance import (
                       FileRecord,
                       Provenance,
                       cli_provenance,
                       count_rows,
                       file_record,
                       sha256_file,
)
from .regression import coefficient_table, regression_report

__all__ = [
    "Report", "Section", "KeyFigure", "Paragraph", "Bullets", "Table", "Figure", "TrustLine", "format_number",
    "CAUTION_SCREEN", "CAUTION_CALIBRATION",
    "Provenance", "FileRecord", "file_record", "sha256_file", "count_rows", "cli_provenance",
    "monitoring_report", "worst_rows", "regression_report", "coefficient_table",
    "likelihood_report", "likelihood_rows", "calibration_report",
]
