"""The laser-safety note: printed after every run, study and check of a figure, and recorded in
summary.json. Lasers at these energies blind people and burn skin; the figures here (damage fluences
above all) are estimates, and local regulations, the laser-safety standards and the site's laser
safety officer come first."""

SAFETY_NOTE = ("Laser safety: beams at these energies are Class 4 hazards to eyes and skin; damage "
               "thresholds here are estimates. Follow local regulations, the laser-safety standards "
               "and your laser safety officer.")
