"""ampmodel: spatially resolved laser-amplifier model (pulsed Frantz–Nodvik slices, saturable gain maps)."""
__version__ = "0.1.0"
