"""A parameter sweep of 64 gratings (8 periods x 8 orientations): serial against a dask batch.

The serial run computes the holograms one after another with the engine's
default settings (all cores for each FFT and kernel); the batch runs them as a
dask-parallel batch on local threads, one hologram per core. Prints::

    parallel_speedup=<serial wall / batch wall> cpu_use=<batch CPU / (wall x cores)>
"""

from __future__ import annotations

import argparse
import os
import time
from functools import partial

import numpy as np

from stimplan.batch import Task, parallel_workers, run_batch
from stimplan.holography import IftaSettings, design_hologram
from stimplan.optics.system import SLM, Eye, Illumination, OpticalSystem, Relay
from stimplan.optics.target import Target
from stimplan.stimuli import Grating


def _one(system, target, settings, *, workers):
    return design_hologram(target, system, settings, workers=workers).levels


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--slm-pixels", type=int, default=512)
    ap.add_argument("--iterations", type=int, default=30)
    args = ap.parse_args(argv)
    n = args.slm_pixels
    system = OpticalSystem(
        SLM(n, n, 8.0, 0.93, 256),
        Illumination(880.0, 1.0, "gaussian", waist_mm=n * 8e-3 / 3.5),
        Relay(0.2),
        Eye(60.45, 4.5, 0.8, "rat"),
    )
    grid = system.design_grid()
    x, y = grid.coords_um()
    window = ((np.abs(x) < 500) & (np.abs(y) < 500)).astype(np.float32)
    settings = IftaSettings(method="mraf", iterations=args.iterations, initial="lens")
    tasks = []
    for period in np.geomspace(60.0, 600.0, 8):
        for angle in np.arange(8) * 22.5:
            g = Grating(period_um=float(period), rotation_deg=float(angle))
            t = Target.from_intensity(g.render(grid) * window, grid)
            tasks.append(Task(partial(_one, system, t, settings)))
    run_batch(tasks[:2], scheduler="serial")  # compile and warm up
    run_batch(tasks[:2], scheduler="threads")
    t0 = time.perf_counter()
    serial = run_batch(tasks, scheduler="serial")
    t_serial = time.perf_counter() - t0
    c0, t0 = time.process_time(), time.perf_counter()
    batch = run_batch(tasks, scheduler="threads")
    t_batch = time.perf_counter() - t0
    cpu = time.process_time() - c0
    cores = parallel_workers()
    same = all(np.array_equal(a, b) for a, b in zip(serial, batch, strict=True))
    print(
        f"parallel_speedup={t_serial / t_batch:.2f} cpu_use={cpu / (t_batch * cores):.2f} "
        f"cores={cores} holograms={len(tasks)} identical={same} pid={os.getpid()}",
        flush=True,
    )


if __name__ == "__main__":
    main()
