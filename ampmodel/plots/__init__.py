"""Figures of a run and of a study, one module per family: maps.py, layout.py (energy, pulse,
B-integral along the layout), gain.py, beam.py, cw.py, fibre.py, trains.py, sweep.py (with limits.py:
the limit lines of study figures); run.py lists every figure of a run as a job and drawing.py draws the
jobs in forked worker processes; common.py holds what they share (one Agg canvas per figure, the atomic PNG
writer, colours, units, labels); placement.py puts a panel's legend between the panel and its title,
never over the data. They read a Result and never recompute physics.
"""
