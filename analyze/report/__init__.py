"""Reports: JSON, terminal text and self-contained HTML.

Modules: :mod:`~analyze.report.json_report`, :mod:`~analyze.report.text`,
:mod:`~analyze.report.html_page` (page frame and shared tables),
:mod:`~analyze.report.svg_layout`, :mod:`~analyze.report.svg_plots`,
:mod:`~analyze.report.html_check`, :mod:`~analyze.report.html_compare`.

May import: everything below it (:mod:`extract`, stages, physics, search,
compare).  Never :mod:`analyze.cli`.
"""
