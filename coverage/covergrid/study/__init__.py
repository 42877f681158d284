"""The study file: its models, messages, loading, and the one translation into a run.

- :mod:`~covergrid.study.sections`, :mod:`~covergrid.study.trade_sections`,
  :mod:`~covergrid.study.models`: what a study file may contain (pydantic models);
- :mod:`~covergrid.study.messages`: validation problems as one-line located messages;
- :mod:`~covergrid.study.loading`: safe YAML, :func:`load_study`, the JSON Schema;
- :mod:`~covergrid.study.build`: :func:`resolve`, the study as the computation takes it.
"""

from __future__ import annotations

from covergrid.study.build import ResolvedStudy, resolve
from covergrid.study.loading import export_schema, load_study, parse_study, with_overrides
from covergrid.study.models import Study

__all__ = ["ResolvedStudy", "Study", "export_schema", "load_study", "parse_study", "resolve",
           "with_overrides"]
