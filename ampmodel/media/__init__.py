"""The gain medium before the beam: small-signal gain maps from a gain, a stored energy or a pump
(gain_maps.py), and the continuous pump of cw runs with its bleaching (cw_pump.py). Imports kernels,
description and units.
"""
