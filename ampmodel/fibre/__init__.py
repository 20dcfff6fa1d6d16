"""Doped fibres (kind = "fibre"): channels of signal, pump and ASE along the fibre, cw and pulsed.

model.py (FibreModel: channels, rings, overlaps), steady_state.py (the cw steady state by relaxation
sweeps), newton.py (Newton's method on the discretised equations), pulsed.py (Frantz–Nodvik through
the slices, recovery between pulses, the periodic train), diagnostics.py (the summary), run.py
(simulate_fibre: stages in step order, the Result). Imports kernels, description and units.
"""
