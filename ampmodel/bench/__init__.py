"""The benchmark behind ``ampmodel bench``: speed and memory figures, measured side by side in one run.

Every ratio compares two things timed in the same run one after the other, each repeated and the best
time kept (the least disturbed by other work on the machine). Single-threaded work in this process
(simulate, the plain loop, the scaling) is timed in CPU time (time.process_time): on a machine shared
with other jobs, waiting for a core is not counted; the wall times are reported beside. The sweep, the
figures and the start-up are wall times (they are about processes). The targets live here and only here: tests
never assert a time.

Figures (the full set; ``quick`` runs the same measurements on small cases, for a test):

* ``pulsed_ratio``: :func:`ampmodel.simulate` on the benchmark case (a four-pass Nd:YAG slab that fills
  the window, so that every pixel is lit; 256² pixels, 64 time slices, 20 z-slices, no diffraction; the
  built-in Nd:YAG has n2, so the B-integral is tracked) against :func:`cases.reference_loop`, a plain
  numpy loop doing the same slice updates on the same arrays, without the B-integral, peaks and
  bookkeeping (target <= 1.5);
* ``pulsed_composite_ratio``: the same case with n2 = 0: no result needs the inside of the medium, and
  the solver traverses it by composite slices (target <= 1.0);
* ``pulsed_rod_ratio``: a round rod in the same window (39 % of the pixels inside its clear aperture):
  the solver computes those, the plain loop every pixel (target <= 1.0);
* ``pulsed_spectral_ratio``: the slab with a stretched seed (0.5 nm, chirped), every time slice with its
  own cross-sections, against :func:`cases.reference_loop_spectral`, the plain loop on populations
  (target <= 1.5);
* ``diffraction_ratio``: the round rod with diffraction (128², the field path) against the bare FFTs it
  needs, the faster of batched over the whole field and in cache-sized chunks on the same threads
  (:func:`measure.measure_diffraction`; target <= 1.5);
* ``sweep_speedup``: 8 independent runs of the rod (128²) on 2 workers against 1 (target >= 1.7);
* ``scaling_spread``: time per pixel·slice·step of the slab at 128², 256², 512² (flat within 25 %);
* ``memory_ratio``: peak memory of the 512² slab (resident, measured in a child process, less the
  interpreter and its modules measured the same way) against the arrays it must hold
  (:func:`ampmodel.pulsed.memory.required_array_bytes`; target <= 1.5);
* ``memory_peak_MB``: the peak of the 256² four-pass case, interpreter included (target <= 600 MB);
* ``memory_estimate_ratio``: :func:`ampmodel.simulation.memory_estimate_bytes` against that measured peak
  (the guard that refuses too-large runs; target 1.0 to 1.3: never below the real peak);
* ``figures_speedup``: writing the figures of a run (the rod at 96², two passes: the demo's set of
  figures) and of a 2 x 2 sweep of it, drawn as before (one figure after another in this process, a
  canvas built for each, PNG at zlib level 6, each figure cleared) against as now (forked worker
  processes on the cores this process may use, the sweep's figures on one shared canvas per process,
  zlib level 1; plots/drawing.py, plots/sweep.py), wall time, interleaved (target >= 2.0);
* ``startup_s``: wall time of ``ampmodel --help`` in a new process (target <= 0.5 s).
"""
