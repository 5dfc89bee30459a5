"""Crafted and damaged run files: a corpus made by mutating one valid file
(every attribute and dataset deleted in turn, dtypes and shapes changed, small
arrays made non-finite) is refused on open with one line naming what is wrong,
and the commands that read run files exit 2."""
from __future__ import annotations

import shutil

import h5py
import numpy as np
import pytest

from sojourn.cli import main
from sojourn.errors import RunFileError
from sojourn.store import RunFile
from sojourn.store.layout import DATASETS, ROOT_ATTRS, SLOT_ATTRS, SLOTS
from scenarios import tiny_step


VALID = tiny_step({"title": "corpus", "measure.region": [0.0, 10.0]})


def _delete_attr(node_name, key):
    def mutate(f):
        del f[node_name].attrs[key]
    return f"no attribute {node_name}{'' if node_name.endswith('/') else '/'}{key}", mutate


def _set_attr(node_name, key, value, what):
    def mutate(f):
        f[node_name].attrs[key] = value
    return f"{node_name} {key} {what}", mutate


def _delete(name):
    def mutate(f):
        del f[name]
    return f"no dataset /{name}", mutate


def _replace(name, how, what):
    def mutate(f):
        old = f[name][...]
        del f[name]
        f[name] = how(old)
    return f"/{name} {what}", mutate


def mutations():
    out = [_delete_attr("/", key) for key in ROOT_ATTRS]
    out += [_delete(name) for name in DATASETS]   # (an OPTIONAL one may be absent)
    out += [_delete_attr("snapshots", "committed"), _delete_attr("observables", "region"),
            _delete_attr("observables", "reference"),
            _delete_attr("observables/samples", "detectors")]
    out += [_delete_attr(f"checkpoint/{slot}", key) for slot in SLOTS for key in SLOT_ATTRS]
    out += [_replace(name, lambda a: a.astype("S8") if a.dtype.kind != "S" else a, "as text")
            for name in ("grid/x", "potential/V", "snapshots/t", "snapshots/psi",
                         "observables/norm", "observables/samples/flux")]
    out += [_replace(name, lambda a: a[:-1], "one row short")
            for name in ("grid/x", "potential/V", "snapshots/t", "observables/P_left",
                         "observables/samples/t")]
    out += [_replace("snapshots/psi", lambda a: a.real, "real"),
            _replace("snapshots/psi", lambda a: a[..., None], "3-dimensional"),
            _replace("observables/samples/flux", lambda a: a[:, :0], "no columns"),
            _replace("potential/V", lambda a: np.where(np.arange(len(a)) == 3, np.nan, a), "nan"),
            _replace("grid/x", lambda a: a[::-1].copy(), "decreasing")]
    out += [_set_attr("/", "dt", -1.0, "negative"), _set_attr("/", "dt", np.nan, "nan"),
            _set_attr("/", "dt", "fast", "text"), _set_attr("/", "steps", 2.5, "fraction"),
            _delete_attr("units", "length"), _delete_attr("units", "hbar"),
            _set_attr("units", "electron_mass", -1.0, "negative"),
            _delete_attr("packet", "k0"), _set_attr("packet", "center", np.nan, "nan"),
            _set_attr("packet", "width", "wide", "text"),
            _set_attr("/", "mass_internal", 0.0, "zero"),
            _delete("units"), _delete("packet"), _delete("provenance"),
            _set_attr("/", "format_version", "two", "text"),
            _set_attr("snapshots", "committed", np.int64(10**6), "too many"),
            _set_attr("snapshots", "committed", np.int64(-1), "negative"),
            _set_attr("snapshots", "committed", "all", "text"),
            _set_attr("checkpoint/a", "snapshots", np.int64(10**6), "no slot"),
            _set_attr("observables", "region", np.array([1.0, 2.0, 3.0]), "three numbers"),
            _set_attr("observables/samples", "detectors", np.array([1.0, 2.0, 3.0]),
                      "three detectors")]
    return out


@pytest.fixture(scope="module")
def valid(tmp_path_factory):
    from sojourn.build import build
    from sojourn.config.scenario import load
    from sojourn.workflows import run
    folder = tmp_path_factory.mktemp("corpus")
    (folder / "s.yaml").write_text(VALID)
    return run(build(load(folder / "s.yaml")), folder / "valid.h5")


def test_the_valid_file_opens(valid):
    with RunFile(valid) as rf:
        assert rf.status == "complete" and len(rf) == 5


def test_every_mutation_is_refused_in_one_line(valid, tmp_path):
    refused, changed = [], 0
    for i, (what, mutate) in enumerate(mutations()):
        path = tmp_path / f"m{i}.h5"
        shutil.copy(valid, path)
        with h5py.File(path, "r+") as f:
            mutate(f)
        changed += 1
        try:
            with RunFile(path) as rf:
                # a mutation that leaves the file readable must leave it whole
                rf.observables(), rf.samples(), rf.psi(-1), rf.scenario()
                opened = what
        except RunFileError as exc:
            message = str(exc)
            assert "\n" not in message and str(path) in message, (what, message)
            refused.append(what)
            continue
        raise AssertionError(f"accepted a damaged file: {opened}")
    assert len(refused) == changed > 60


@pytest.mark.parametrize("index", [0, 25, 40, 60])
def test_the_commands_exit_2_on_a_crafted_file(valid, tmp_path, capsys, index):
    what, mutate = mutations()[index]
    path = tmp_path / "crafted.h5"
    shutil.copy(valid, path)
    with h5py.File(path, "r+") as f:
        mutate(f)
    for argv in (["inspect", str(path)], ["delay", str(path)],
                 ["render", str(path), "--figure", str(tmp_path / "f.png")]):
        code = main(argv)
        err = capsys.readouterr().err
        assert code == 2, (what, argv, err)
        assert "Traceback" not in err and len(err.strip().splitlines()) == 1, (what, err)
