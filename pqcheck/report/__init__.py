"""Reports and results export.

- :mod:`pqcheck.report.job`: what a report covers (:class:`~pqcheck.report.job.ReportJob`,
  :class:`~pqcheck.report.job.CaptureRun`, :class:`~pqcheck.report.job.ReportMeta`);
- :mod:`pqcheck.report.figures`: spectra against limits, waveforms, distortion over time;
- :mod:`pqcheck.report.pdf`: the PDF (:func:`~pqcheck.report.pdf.render_pdf`);
- :mod:`pqcheck.report.results`: the results JSON and tidy CSV tables;
- :mod:`pqcheck.report.style`, :mod:`pqcheck.report.text`: typography and fixed statements.

Example (a notebook)::

    from pqcheck.run.plan import load_plan
    from pqcheck.run.build import run_plan
    from pqcheck.report.job import ReportJob, ReportMeta
    from pqcheck.report.pdf import render_pdf
    from pqcheck.report.results import job_json

    plan = load_plan("samples/kestrel-bay-plan.toml")
    job = ReportJob(ReportMeta(title=plan.title, report_id="LAB-1"), run_plan(plan), plan)
    pdf_bytes = render_pdf(job, results_json=job_json(job))
"""
