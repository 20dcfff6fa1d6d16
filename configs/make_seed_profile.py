"""Write seed_profile.png, the invented beam-profiler frame of measured_seed_profile.toml.

An invented measurement: a slightly elliptical Gaussian beam (1/e² diameters 4.6 mm in x and 4.2 mm
in y, so D4σ the same), its centre 0.4 mm right of and 0.25 mm below the frame's centre, on a camera
of 160 x 128 pixels of 70 µm at the seed plane, 16-bit counts: a peak of 40000 counts above a dark
level of 600 counts, with Gaussian read noise of 8 counts rms. Run from the repository's root:

    python configs/make_seed_profile.py
"""
from pathlib import Path

import numpy as np
from PIL import Image

PIXEL_M = 70e-6
NX, NY = 160, 128
DIAMETER_X_M, DIAMETER_Y_M = 4.6e-3, 4.2e-3
CENTRE_M = (0.4e-3, -0.25e-3)
PEAK, DARK, NOISE = 40000.0, 600.0, 8.0


def frame(seed: int = 2026) -> np.ndarray:
    x = (np.arange(NX) - (NX - 1) / 2) * PIXEL_M - CENTRE_M[0]
    y = (np.arange(NY) - (NY - 1) / 2) * PIXEL_M - CENTRE_M[1]
    beam = PEAK * np.exp(-2 * (x[None, :] / (DIAMETER_X_M / 2)) ** 2 - 2 * (y[:, None] / (DIAMETER_Y_M / 2)) ** 2)
    counts = beam + DARK + np.random.default_rng(seed).normal(0.0, NOISE, beam.shape)
    return np.clip(np.round(counts), 0, 65535).astype(np.uint16)


if __name__ == "__main__":
    out = Path(__file__).with_name("seed_profile.png")
    Image.fromarray(frame()).save(out)
    print(f"wrote {out}")
