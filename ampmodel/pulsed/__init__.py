"""The pulsed path (bulk media): the layout run step by step on the fluence or the field.

run.py (simulate_pulsed: gain maps, seed, the steps in order, the Result), passes.py and field_pass.py
(a pass through a medium on each path), clocks.py and repeats.py (time between steps: pumping and
decay, round trips), cavity_mode.py (a regenerative cavity's mode on the fluence path), trains.py and
train_cycles.py (a pulse train's periodic steady state: one pulse or a cycle of pulses), diagnostics.py
(the summary), spectra.py (a chirped seed's wavelengths and spectra), measured.py (the warnings on a
measured pulse trace), memory.py (the arrays a run needs). Imports the beam, media, kernels and description.
"""
