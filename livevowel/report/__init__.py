"""Reports of recorded sessions: one session, or a speaker's progress over weeks.

A report is a folder with ``report.html`` -- self-contained: styles inline,
figures as base64 PNG, audio clips inline or linked relatively (see
:mod:`livevowel.report.build` for the choice by size) -- and the same
figures as PNG files. It names the speaker only by pseudonym, carries the
app version, the settings and target set, the standard caution
(:data:`livevowel.CAUTION`) and a line that local rules on health-data
privacy apply, and prints on A4 and US Letter.

* :mod:`livevowel.report.data` -- sessions, per-target and per-block tables
  and trends computed from the store;
* :mod:`livevowel.report.figures` -- the vowel plane and the trend figure
  (matplotlib, headless Agg);
* :mod:`livevowel.report.html` -- page, tables, caution;
* :mod:`livevowel.report.build` -- :func:`build_session_report`,
  :func:`build_speaker_report`.
"""

from livevowel.report.build import (CLIP_MODES, INLINE_LIMIT_BYTES, REPORT_NAME, ReportFiles,
                                    build_session_report, build_speaker_report)
from livevowel.report.data import (SessionData, TallyRow, TrendPoint, is_trial, load_session, load_speaker,
                                   per_block, per_target, result_of, trend)

__all__ = ["CLIP_MODES", "INLINE_LIMIT_BYTES", "REPORT_NAME", "ReportFiles", "SessionData", "TallyRow", "TrendPoint",
           "build_session_report", "build_speaker_report", "is_trial", "load_session", "load_speaker", "per_block",
           "per_target", "result_of", "trend"]
