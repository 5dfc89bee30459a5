"""The time loop: propagate a built scenario between recordings and hand each
recording to a recorder (a run file's writer, or an in-memory twin); the loop
never opens files itself.

A recorder must provide:

1. ``snapshot(step, t, psi, observables, samples, raw_absorbed)``: a recording
   at `step` (t = step·dt): ψ(t), the recorded observables (a dict of floats),
   the samples taken since the previous snapshot or checkpoint (a dict of
   arrays, `Sampler.batch`), and the raw absorbed integrals (left, right).
   The first call is step 0 of a new run.
2. ``checkpoint(step, t, psi, samples, raw_absorbed)``: a resumable state at a
   step between recordings (ψ(t) is a true state), handed over when the run
   stops early or `checkpoint_seconds` have passed since the last one. The
   samples since the previous snapshot or checkpoint come with it: they are
   not repeated in the next snapshot. Resuming from it means passing
   ``state = {"step", "psi", "raw_absorbed"}`` back to `evolve`.
3. ``close(status)``: called only when the loop ends early, with
   'interrupted' (a stop request, or KeyboardInterrupt) or 'failed' (any other
   error); after a normal end the caller finishes the recorder.
4. None of these may keep a reference to `psi` past the call (it is the
   propagator's buffer): copy what is kept.
"""
from __future__ import annotations

import math
import time
from typing import Callable, Optional

from threadpoolctl import threadpool_limits

from ..errors import NonFinite
from . import observables as obs
from .sampler import Sampler


class _Watch:
    """The propagator's stop callback: True on a stop request, or when a
    periodic checkpoint is due (`stopping` says which)."""

    def __init__(self, stop: Optional[Callable[[], bool]], every: Optional[float]):
        self.stop, self.every = stop, every
        self.stopping = False
        self.last = time.monotonic()

    def __call__(self) -> bool:
        if self.stop is not None and self.stop():
            self.stopping = True
            return True
        return self.every is not None and time.monotonic() - self.last >= self.every


def evolve(setup, recorder, state: Optional[dict] = None,
           progress: Optional[Callable[[int, int], None]] = None,
           stop: Optional[Callable[[], bool]] = None,
           checkpoint_seconds: Optional[float] = None) -> None:
    """Run a built scenario from t = 0 (or from a checkpoint `state`: psi, step,
    raw_absorbed) to its duration, recording into `recorder` (rules above).

    `progress(done_steps, total_steps)` is called after each recording.
    `stop()` is asked every 0.01-0.1 s of run (`Propagator.check_every`
    steps); when it says True the current state goes to
    `recorder.checkpoint`, the recorder is closed 'interrupted' and
    KeyboardInterrupt is raised, as on Ctrl-C. With `checkpoint_seconds`, a
    checkpoint is also handed over whenever that much wall time has passed
    since the last snapshot or checkpoint. On KeyboardInterrupt the recorder
    is closed with status 'interrupted'; on any other error, 'failed'.
    """
    if checkpoint_seconds is not None and not checkpoint_seconds > 0:
        raise ValueError(f"checkpoint_seconds must be > 0 (got {checkpoint_seconds!r})")
    if state is not None and not (set(state) >= {"step", "psi", "raw_absorbed"}
                                  and 0 <= state["step"] <= setup.steps):
        raise ValueError("a checkpoint state needs step (within the run), psi and raw_absorbed")
    watch = _Watch(stop, checkpoint_seconds) if (stop or checkpoint_seconds) else None
    blas = None
    try:
        prop = setup.propagator()
        # the sampler's reductions (numpy's complex dot products) go to a threaded BLAS
        # whose idle threads spin: as many as the FFTs use (one by default), so a run
        # takes no core it does not use (a second run or a sweep's worker may need it)
        blas = threadpool_limits(prop.fft.threads, user_api="blas")
        if state is not None:
            sampler = Sampler(setup, state["raw_absorbed"], prop.closing_kick)
            step = int(state["step"])
            prop.set_state(state["psi"], step)
        else:
            sampler = Sampler(setup, closing=prop.closing_kick)
            step = 0
            prop.set_state(setup.psi0())
            sampler.take(prop.psi, 0.0)
            recorder.snapshot(0, 0.0, prop.psi, sampler.recording(prop.psi, setup),
                              sampler.batch(), tuple(sampler.raw_absorbed))
        while step < setup.steps:
            chunk = min(setup.record_steps - step % setup.record_steps, setup.steps - step)
            done = prop.advance(chunk, setup.sample_steps, sampler, watch)
            step += done
            psi = prop.psi
            if done < chunk:   # a stop request or a periodic checkpoint
                if not math.isfinite(obs.norm(psi, setup.grid.dx)):
                    raise _non_finite(step * setup.dt)
                recorder.checkpoint(step, step * setup.dt, psi, sampler.batch(),
                                    tuple(sampler.raw_absorbed))
                watch.last = time.monotonic()
                if watch.stopping:
                    raise KeyboardInterrupt
                continue
            values = sampler.recording(psi, setup)
            if not math.isfinite(values["norm"]):  # a nan or inf anywhere reaches the norm
                raise _non_finite(step * setup.dt)
            recorder.snapshot(step, step * setup.dt, psi, values, sampler.batch(),
                              tuple(sampler.raw_absorbed))
            if progress:
                progress(step, setup.steps)
            if watch is not None:
                watch.last = time.monotonic()
                if step < setup.steps and watch.stop is not None and watch.stop():
                    raise KeyboardInterrupt   # this snapshot is the last state

    except KeyboardInterrupt:
        recorder.close("interrupted")
        raise
    except BaseException:
        recorder.close("failed")
        raise
    finally:
        if blas is not None:
            blas.restore_original_limits()


def _non_finite(t: float) -> NonFinite:
    return NonFinite(f"ψ became non-finite at t = {t:g}; check the potential and the time step")

