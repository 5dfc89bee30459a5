"""`sojourn bench`: it runs and prints sane fields (no timing assertions)."""
import json

from sojourn.cli import main


def test_bench_quick_prints_a_row_per_size(monkeypatch, tmp_path, capsys):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))  # FFTW wisdom goes here
    assert main(["bench", "--quick", "--sizes", "1024", "2048", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    rows = report["results"]
    assert [r["points"] for r in rows] == [1024, 2048]
    for r in rows:
        assert r["steps_per_second"] > 0 and r["limit_steps_per_second"] > 0
        assert r["fraction"] == r["steps_per_second"] / r["limit_steps_per_second"]
        assert r["point_steps_per_second"] == r["points"] * r["steps_per_second"]
        assert r["sample_steps"] >= 1 and r["threads"] == 1 and r["precision"] == "double"
    assert (tmp_path / "sojourn" / "fftw-wisdom.pickle").exists()

    assert main(["bench", "--quick", "--sizes", "1024", "--single"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert "single precision" in lines[0]
    row = lines[2].split()
    assert row[0] == "1024" and float(row[2]) > 0 and float(row[4]) > 0


def test_bench_refuses_a_tiny_grid(capsys):
    assert main(["bench", "--sizes", "8"]) == 2
    err = capsys.readouterr().err
    assert "too small" in err and "Traceback" not in err
