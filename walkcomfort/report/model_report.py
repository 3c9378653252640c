"""The model report, as the report stage offers it.

The page itself is rendered by :mod:`walkcomfort.model.report_page`: ``walkcomfort fit``
writes it into every bundle, and the model stage may not import the report stage (layer
order), so the renderer lives with the model and is re-exported here for the reports.
"""

from __future__ import annotations

from walkcomfort.model.report_page import CAUTION, gain_sentence, write_model_report

__all__ = ["CAUTION", "gain_sentence", "write_model_report"]
