"""The time loop: propagate a built scenario between recordings and hand each
recording to a recorder (a run file's writer, or an in-memory twin).

A recorder provides `snapshot(step, t, psi, observables, samples, raw_absorbed)`
and `close(status)`; the loop never opens files itself."""
from __future__ import annotations

import math
from typing import Callable, Optional

from ..errors import NonFinite
from .propagate import Propagator
from .sampler import Sampler


def evolve(setup, recorder, state: Optional[dict] = None,
           progress: Optional[Callable[[int, int], None]] = None) -> None:
    """Run a built scenario from t = 0 (or from a checkpoint `state`: psi, step,
    raw_absorbed) to its duration, recording into `recorder`.

    `progress(done_steps, total_steps)` is called after each recording. On
    KeyboardInterrupt (Ctrl-C, or SIGTERM turned into it by the caller) the
    recorder is closed with status 'interrupted'; on any other error, 'failed'.
    """
    sc = setup.scenario
    prop = Propagator(setup.grid, setup.V, setup.hbar, setup.mass, setup.dt, sc.evolve.scheme,
                      setup.W, single=sc.evolve.precision == "single")
    try:
        if state is not None:
            sampler = Sampler(setup, state["raw_absorbed"])
            step = state["step"]
            prop.set_state(state["psi"])
        else:
            sampler = Sampler(setup)
            step = 0
            prop.set_state(setup.psi0())
            sampler.take(prop.psi, 0.0)
            recorder.snapshot(0, 0.0, prop.psi, sampler.recording(prop.psi, setup),
                              sampler.batch(), tuple(sampler.raw_absorbed))
        while step < setup.steps:
            chunk = min(setup.record_steps - step % setup.record_steps, setup.steps - step)
            sampler.start_step = step
            prop.advance(chunk, setup.sample_steps, sampler)
            step += chunk
            psi = prop.psi
            values = sampler.recording(psi, setup)
            if not math.isfinite(values["norm"]):  # a nan or inf anywhere reaches the norm
                raise NonFinite(f"ψ became non-finite at t = {step * setup.dt:g}; "
                                "check the potential and the time step")
            recorder.snapshot(step, step * setup.dt, psi, values, sampler.batch(),
                              tuple(sampler.raw_absorbed))
            if progress:
                progress(step, setup.steps)
    except KeyboardInterrupt:
        recorder.close("interrupted")
        raise
    except BaseException:
        recorder.close("failed")
        raise

