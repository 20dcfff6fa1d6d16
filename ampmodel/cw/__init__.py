"""The cw path (mode = "cw"): the steady state of a layout whose passes saturate their media together.

medium.py (a medium on its voxel grid, its pump settled), steady_state.py (the layout iterated to its
steady state), diagnostics.py (the summary), run.py (simulate_cw: the Result). Imports the beam,
media, kernels and description; never output writers, plots or studies.
"""
