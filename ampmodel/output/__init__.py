"""A run's data and files: Result (result.py, data only), result.h5 (hdf5.py), what reproduces a run
(provenance.py), summary.json read as figures (summary.py), the atomic writer every file goes through
(atomic.py), run folders that are claimed only when complete (run_folder.py) and the whole folder
written from a Result (save.py). Imports description, materials and plots; never the paths.
"""
