"""The verification report (figures, tables, a self-contained HTML page) and exports, from logs and
campaign summaries. No Java, except the CCSDS OEM export (through sim.orekit.oem_export, imported
inside :func:`sim.report.export.export_run` only).

- :mod:`build`: :func:`~sim.report.build.build_report` (``covey report``): the report folder;
- :mod:`rundata`, :mod:`single`: a run log's arrays, the single-run figures and tables;
- :mod:`campaign`: a campaign summary's figures and tables (Monte Carlo, sweep, error budget);
- :mod:`stats`: confidence ellipses, per-axis bounds (chi-square), empirical CDFs, percentiles;
- :mod:`figures`, :mod:`style`, :mod:`tables`, :mod:`html`: figure specs, covey's figure style and
  deterministic PNG/PDF writer, CSV/LaTeX/HTML tables, the page;
- :mod:`verification`: :class:`~sim.report.verification.VerificationRow`, the verification matrix
  (fed by the requirements gate, or read from a CSV/JSON file);
- :mod:`export` (``covey export``), :mod:`oem_check`: OEM/CSV export and the CCSDS 502.0-B
  keyword check.

May import: numpy, scipy, matplotlib, h5py, sim.errors, sim.log, sim.judge, sim.models.frames,
sim.campaign.summary, sim.gate; sim.orekit.oem_export lazily (the OEM export only).
"""
