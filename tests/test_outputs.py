"""Output safety (bridge/outputs.py), library messages (bridge/capture.py), bounded YAML and CSV cells.

The atomicity checks limit the size of files a child process may write (`resource.RLIMIT_FSIZE`, the
limit behind `ulimit -f`; Python ignores SIGXFSZ, so a write past the limit fails with EFBIG) and show
that the previous file is intact and no temporary file is left behind.
"""
from __future__ import annotations

import hashlib
import json
import logging
import os
import resource
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml

from bridge.capture import library_messages
from bridge.errors import OutputError
from bridge.outputs import MANIFEST, check_file, check_folder, read_manifest, write_file, write_folder
from bridge.render.formats import spreadsheet_safe, spreadsheet_text
from bridge.render.tables import Grid, csv_text

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT), "PYTHONDONTWRITEBYTECODE": "1"}


def limited(code: str, limit_bytes: int, cwd: Path) -> subprocess.CompletedProcess:
    """Run Python `code` in a child whose files may not grow beyond `limit_bytes`."""
    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))
    return subprocess.run([sys.executable, "-c", code], cwd=cwd, env=ENV, capture_output=True, text=True,
                          preexec_fn=limit, timeout=120)


def test_full_disk_leaves_the_previous_file_intact(tmp_path):
    target = tmp_path / "out.json"
    target.write_text('{"previous": true}\n')
    done = limited("from pathlib import Path\nfrom bridge.outputs import write_file\n"
                   "write_file(Path('out.json'), 'x' * 100_000)", 4096, tmp_path)
    assert "OutputError" in done.stderr and "File too large" in done.stderr, done.stderr
    assert target.read_text() == '{"previous": true}\n'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json"]   # no temporary file left


def test_full_disk_during_draw_keeps_the_earlier_figures(tmp_path):
    """The command line: a second `draw` into the same folder fails for want of room; the first's files stay."""
    (tmp_path / "model.csv").write_text("person,time,y\n" + "".join(f"p{i},{t},{i + t * 1.5 + (i * t) % 3}\n"
                                                                     for i in range(8) for t in range(4)))
    (tmp_path / "model.yaml").write_text(yaml.safe_dump({"data": {"path": "model.csv", "layout": "long",
                                                                  "person": "person", "time": "time", "outcome": "y"}}))
    command = [sys.executable, "-m", "bridge.cli", "draw", "model.yaml", "--structure-only", "--out", "figure"]
    first = subprocess.run(command, cwd=tmp_path, env=ENV, capture_output=True, text=True, timeout=120)
    assert first.returncode == 0, first.stderr
    before = {p.name: p.read_bytes() for p in (tmp_path / "figure").iterdir()}
    (tmp_path / "figure" / "path-diagram.dot").unlink()     # the next run must write it again (and fail)
    manifest = read_manifest(tmp_path / "figure")
    done = limited(f"import sys; sys.argv = {command[2:]!r}; from bridge.cli import main; main()", 2048, tmp_path)
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr and len(done.stderr.strip().splitlines()) == 1, done.stderr
    assert "File too large" in done.stderr
    after = {p.name: p.read_bytes() for p in (tmp_path / "figure").iterdir()}
    assert after == {k: v for k, v in before.items() if k != "path-diagram.dot"}
    assert read_manifest(tmp_path / "figure") == manifest


def test_alias_bomb_refused_quickly_and_in_little_memory(tmp_path):
    """A 1 kB YAML of nested aliases (9^25 entries expanded) is refused within 5 s and 500 MB."""
    lines = ["data: {path: a.csv, person: p, time: t, outcome: y}", "a0: &a0 [x, x, x, x, x, x, x, x, x]"]
    lines += [f"a{i}: &a{i} [" + ",".join([f"*a{i - 1}"] * 9) + "]" for i in range(1, 25)]
    bomb = ("\n".join(lines) + "\n")[:1024]
    bomb = bomb[: bomb.rfind("\n") + 1]
    assert 900 <= len(bomb.encode()) <= 1024
    (tmp_path / "bomb.yaml").write_text(bomb)
    code = ("import resource, time, sys\nfrom bridge.errors import DescriptionError\nfrom bridge.spec import load\n"
            "began = time.perf_counter()\ntry:\n    load('bomb.yaml')\nexcept DescriptionError as exc:\n"
            "    print(exc)\nprint(time.perf_counter() - began)\n"
            "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)\n")
    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env=ENV, capture_output=True, text=True,
                          timeout=60)
    message, seconds, peak_mib = done.stdout.strip().splitlines()
    assert "aliases are expanded" in message and len(message) < 200
    assert float(seconds) < 5.0
    assert float(peak_mib) < 500, peak_mib   # the whole process, imports included


def test_folder_rules(tmp_path):
    folder = tmp_path / "out"
    write_folder(folder, {"a.txt": b"one", "b.txt": b"two"})
    manifest = json.loads((folder / MANIFEST).read_text())
    assert manifest["files"]["a.txt"] == [hashlib.sha256(b"one").hexdigest()]
    (folder / "mine.txt").write_text("the user's")
    write_folder(folder, {"a.txt": b"three"})        # b.txt was ours and unchanged: removed; mine.txt stays
    assert sorted(p.name for p in folder.iterdir()) == sorted([MANIFEST, "a.txt", "mine.txt"])
    (folder / "a.txt").write_text("edited by the user")
    with pytest.raises(OutputError, match=r"a\.txt was not written by sembridge or was changed since"):
        write_folder(folder, {"a.txt": b"four"})
    with pytest.raises(OutputError, match=r"mine\.txt was not written by sembridge"):
        check_folder(folder, ["mine.txt"])
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "x.csv").write_text("1")
    with pytest.raises(OutputError, match=r"holds files that sembridge did not write \(e\.g\. 'x\.csv'\)"):
        check_folder(foreign, ["report.html"])


def test_file_rules(tmp_path):
    data = tmp_path / "data.csv"
    data.write_text("a\n")
    (tmp_path / "sub").mkdir()
    for spelling in (data, tmp_path / "sub" / ".." / "data.csv", Path(os.path.relpath(data))):
        with pytest.raises(OutputError, match=r"is an input file \(data\.csv\)"):
            check_file(spelling, [data])
    with pytest.raises(OutputError, match=r"it is a folder"):
        check_file(tmp_path / "sub", [data])
    with pytest.raises(OutputError, match=r"data\.csv is a file, not a folder"):
        check_file(data / "out.json", [])
    write_file(tmp_path / "new" / "out.json", "{}")
    assert (tmp_path / "new" / "out.json").read_text() == "{}"


def test_library_messages_are_collected_not_printed(capsys):
    with library_messages() as messages:
        logging.warning("Sample covariance matrix is not PD.\nmore detail")
        np.log(np.array([-1.0]))
        warnings.warn("first", RuntimeWarning)
        warnings.warn("first", RuntimeWarning)
    assert messages == ["Sample covariance matrix is not PD.", "invalid value encountered in log", "first"]
    captured = capsys.readouterr()
    assert "WARNING" not in captured.err and "RuntimeWarning" not in captured.err


@pytest.mark.parametrize("text, safe", [("=1+1", "'=1+1"), ("+cmd", "'+cmd"), ("-2+3", "'-2+3"), ("@SUM(A1)", "'@SUM(A1)"),
                                        ("\tx", "'\tx"), ("slope", "slope"), ("mean.slope", "mean.slope")])
def test_spreadsheet_text(text, safe):
    """Cells starting with = + - @ (and tab, carriage return) are run as formulas by spreadsheet programs
    (OWASP, "CSV Injection"); a leading apostrophe makes them text."""
    assert spreadsheet_text(text) == safe


def test_csv_neutralises_text_cells_but_not_numbers():
    grid = Grid("t", "title", ("=name", "estimate"), ("text", "number"), (("=HYPERLINK(1)", -1.5), ("-x", 2.0)))
    assert csv_text(grid).splitlines() == ["'=name,estimate", "'=HYPERLINK(1),-1.5", "'-x,2.0"]
    frame = spreadsheet_safe(pd.DataFrame({"@q": ["+a", "b"], "v": [-1.0, 2.0]}))
    assert frame.to_csv(index=False).splitlines() == ["'@q,v", "'+a,-1.0", "b,2.0"]


def test_description_timing_is_bounded(tmp_path):
    """A 240 kB list (40,000 entries, twice the limit) is refused quickly."""
    body = "\n".join("  - 1" for _ in range(40_000))
    (tmp_path / "long.yaml").write_text(f"data: {{path: a.csv, person: p, time: t, outcome: y}}\nestimation:\n"
                                        f"  waves:\n{body}\n")
    from bridge.errors import DescriptionError
    from bridge.spec import load
    began = time.perf_counter()
    with pytest.raises(DescriptionError, match=r"more than 20,000 entries"):
        load(tmp_path / "long.yaml")
    assert time.perf_counter() - began < 5
