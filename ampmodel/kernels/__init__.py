"""Pure numpy on arrays: no I/O, no config objects, no logging; they import only each other.

frantz_nodvik.py and fn_pass.py (the pulsed slice and pass), field_step.py and diffraction.py (the
field path), cw_saturation.py (the cw slice), inversion.py (N2 over a delay), fibre_rates.py and
fibre_modes.py (fibre populations, channels and modes), beam_shapes.py (grids, profiles, pulse
shapes, the seed's field), traces.py (measured traces as straight lines: exact integrals, their
inverse, maxima), beam_figures.py (D4σ, modulation, fill factor, M²), measured_profile.py (a camera
frame made ready for the grid). Speed is won here.
"""
