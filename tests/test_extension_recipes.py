"""The extension recipes of DEVELOPERS.md, carried out: a potential term added
by one model and one registry entry is read by the scenario schema, the grid,
the guards and the theory with nothing else changed (the delay-method recipe
is carried out in test_measure.py, the storage backend by store.MemoryRun)."""
from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import pytest

# A new term, written as DEVELOPERS.md says: a pydantic model deriving from
# _Antiderivative (it has jumps), its fields the scenario keys, put in TERMS
# before the scenario schema is built (at import). Two equal barriers side by
# side: its R(E) must equal that of the two-barrier sum the catalogue already has.
PROGRAM = textwrap.dedent('''
    import json
    from typing import ClassVar
    import numpy as np
    from sojourn.model import potentials
    from sojourn.model.terms import _Antiderivative

    class TwinBarrier(_Antiderivative):
        """Two barriers of `height` and `width`, the second `gap` after the first."""
        kind: ClassVar[str] = "twin_barrier"
        piecewise_constant: ClassVar[bool] = True
        start: float = 0.0
        width: float
        gap: float
        height: float

        def _edges(self):
            a = self.start
            return [a, a + self.width, a + self.width + self.gap, a + 2 * self.width + self.gap]

        def point(self, x, mass=1.0):
            x = np.asarray(x, dtype=float)
            e = self._edges()
            return np.where(((x > e[0]) & (x < e[1])) | ((x > e[2]) & (x < e[3])), self.height, 0.0)

        def antiderivative(self, x):
            e = self._edges()
            return self.height * (np.clip(x, e[0], e[1]) - e[0] + np.clip(x, e[2], e[3]) - e[2])

        def support(self):
            e = self._edges()
            return e[0], e[3]

        def breakpoints(self):
            return self._edges()

        def jumps(self):
            return self._edges()

    potentials.TERMS["twin_barrier"] = TwinBarrier

    from sojourn.build import build
    from sojourn.config.scenario import loads
    from sojourn.theory import scatter

    BASE = """
    units: atomic
    grid: {span: [-300.0, 300.0], points: 4096}
    potential:
    %s
    packet: {center: -120.0, width: 15.0, energy: 0.3}
    evolve: {duration: 50.0}
    """
    new = loads(BASE % "  - twin_barrier: {width: 1.0, gap: 3.0, height: 0.5}", "new.yaml")
    old = loads(BASE % ("  - barrier: {start: 0.0, end: 1.0, height: 0.5}\\n"
                        "  - barrier: {start: 4.0, end: 5.0, height: 0.5}"), "old.yaml")
    E = [0.1, 0.2, 0.3, 0.45]
    a, b = build(new), build(old)
    try:
        loads(BASE % "  - twin_barrier: {width: 1.0, gap: 3.0}", "bad.yaml")
        message = None
    except Exception as exc:
        message = str(exc)
    print(json.dumps({
        "R_new": list(scatter(new.build_potential(), E, hbar=1.0).R),
        "R_old": list(scatter(old.build_potential(), E, hbar=1.0).R),
        "V_diff": float(np.max(np.abs(a.V - b.V))),
        "support": list(a.potential.support()),
        "message": message,
    }))
''')


def test_a_new_potential_term_needs_one_model_and_one_registry_entry():
    done = subprocess.run([sys.executable, "-c", PROGRAM], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    out = json.loads(done.stdout.strip().splitlines()[-1])
    assert out["R_new"] == pytest.approx(out["R_old"], rel=1e-12)
    assert out["V_diff"] < 1e-12 and out["support"] == [0.0, 5.0]
    # the schema's own one-line message names the missing key of the new term
    assert out["message"].startswith("bad.yaml:5: potential[0].twin_barrier.height: required key")
