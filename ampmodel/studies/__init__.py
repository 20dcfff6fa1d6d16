"""Many runs from one config: sweeps (points.py, sweeps.py), tolerance spreads (spread.py), sizing to
a target under limits (sizing.py), fits to measured data (fitting.py, fit_data.py, fit_runs.py), a
stored run again (rerun.py), their folders (store.py), the joblib and dask backends (backends.py),
what their commands print (report.py) and report.html of any result folder (report_files.py reads the
folder, html_report.py builds the page from html_studies.py and html_parts.py). They call load_config and simulate and never reach into the paths.
"""
