"""The gain medium before and between the pulses: its ions (ions.py: N2, the doping, the gain at the
material's wavelength), its pump by the rate equations with bleaching (pumping.py), the gain maps
built from a gain, a stored energy or a pump (gain_maps.py), and the cw voxel under pump and signal
(cw_pump.py). Imports kernels, description and units.
"""
