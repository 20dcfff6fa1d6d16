"""The beam and what the optics between media do to it, shared by the pulsed and cw paths.

state.py (the fluence beam, StepOutcome), fluence_steps.py (losses, apertures, relays on a fluence
map), field.py (the complex field of the diffraction path and free-space propagation), field_steps.py
(the same steps on the field, lenses and spatial filters), grid_checks.py (whether the window and its
sampling hold the field), chunks.py (time slices in threads). Imports kernels, description, units;
never the paths, output or plots.
"""
