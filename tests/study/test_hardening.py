"""Studies under stress: a second run into the same folder, killed runs, failing writers,
hostile text in the study file, images outside the study folder.

Process checks read /proc (Linux ``proc(5)``: field 4 of ``/proc/PID/stat`` is the parent
pid; from memory).
"""

from __future__ import annotations

import errno
import json
import os
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest

from sectio.errors import StudyFileError
from sectio.study import load_study, run_study
from sectio.study._guard import LOCK_NAME, TMP_NAME, StudyLockedError, study_lock

from .conftest import json_files, run_cli


def _children(pid: int) -> set[int]:
    """All descendants of ``pid`` (from the parent pid in /proc/*/stat)."""
    parent_of = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat", "rb") as fh:
                    text = fh.read().decode("ascii", "replace")
                parent_of[int(d)] = int(text.rsplit(")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                pass
    out, frontier = set(), {pid}
    while frontier:
        nxt = {c for c, p in parent_of.items() if p in frontier} - out
        out |= nxt
        frontier = nxt
    return out


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] != b"Z"
    except OSError:
        return False


def _trim(study_dir: Path, keep: tuple[str, ...], one_image: bool = False) -> Path:
    """Keep only the specimens ``keep`` of the test study (fewer fields: a faster test)."""
    p = study_dir / "study.toml"
    head, *parts = p.read_text().split("\n[specimens.")
    parts = [x for x in parts if x.split("]", 1)[0] in keep]
    text = "\n[specimens.".join([head, *parts])
    if one_image:
        text = text.replace("_*.tif", "_f1.tif")
    p.write_text(text)
    return p


def test_second_run_into_the_same_folder_refuses(study_dir, tmp_path):
    out = tmp_path / "o"
    out.mkdir()
    study = load_study(study_dir / "study.toml")
    with study_lock(out):
        with pytest.raises(StudyLockedError, match=rf"^Another sectio study \(process "
                                                   rf"{os.getpid()}\) is writing into "
                                                   rf"{str(out)}; wait for it"):
            run_study(study, out, workers=1, report=False)
    with study_lock(out):  # the lock went with its holder
        pass
    sub = subprocess.Popen([sys.executable, "-c",
                            "import sys, time; from pathlib import Path; "
                            "from sectio.study._guard import study_lock; "
                            "cm = study_lock(Path(sys.argv[1])); cm.__enter__(); "
                            "print('held', flush=True); time.sleep(60)", str(out)],
                           stdout=subprocess.PIPE, text=True)
    try:
        assert sub.stdout.readline().strip() == "held"
        res = run_cli("study", study_dir / "study.toml", "--out", out, "--no-report")
        assert res.returncode == 2
        assert res.stderr.strip() == (f"sectio: Another sectio study (process {sub.pid}) is "
                                      f"writing into {out}; wait for it to finish or choose "
                                      "another --out.")
    finally:
        sub.kill()
        sub.wait()
        sub.stdout.close()


def test_stale_temp_files_are_cleaned_and_paths_relative(study_dir, tmp_path):
    _trim(study_dir, ("S-600",))
    # an image outside the study folder, reached by ../ and by an absolute path
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    (study_dir / "g600_f1.tif").rename(outside / "g600_f1.tif")
    text = (study_dir / "study.toml").read_text()
    text = text.replace('images = ["g600_*.tif"]',
                        f'images = ["../elsewhere/g600_f1.tif", "{study_dir}/g600_f2.tif"]')
    (study_dir / "study.toml").write_text(text)
    out = tmp_path / "o"
    (out / "fields").mkdir(parents=True)
    (out / TMP_NAME / "field-x").mkdir(parents=True)
    (out / TMP_NAME / "field-x" / "field.tif").write_bytes(b"left by a killed run")
    (out / ".report.pdf.abc123xy.tmp").write_bytes(b"")
    (out / "fields" / ".0123.json.k2j4h5g6.tmp").write_bytes(b"")
    run = run_study(load_study(study_dir / "study.toml"), out, workers=1, report=False)
    assert not (out / TMP_NAME).exists() or not any((out / TMP_NAME).iterdir())
    assert not list(out.rglob("*.tmp"))
    text = "".join(p.read_text() for p in out.rglob("*") if p.suffix in (".json", ".csv"))
    assert str(tmp_path) not in text  # no absolute path in any output
    images = run.study_doc["specimens"][0]["images"]
    assert images == ["../elsewhere/g600_f1.tif", "g600_f2.tif"]


def test_hostile_text_reaches_the_report_as_text(study_dir, tmp_path):
    _trim(study_dir, ("S-600", "S-700"), one_image=True)
    text = (study_dir / "study.toml").read_text()
    text = text.replace('title = "Test study"', 'title = "Cost $5 <script>alert(1)</script> \\\\"')
    text = text.replace('series = "anneal"', 'series = "$\\\\frac{a}{$"')
    text = text.replace('name = "annealing temperature"', 'name = "T_$x^"')
    (study_dir / "study.toml").write_text(text)
    out = tmp_path / "o"
    run = run_study(load_study(study_dir / "study.toml"), out, workers=1, report=True)
    assert not run.failed, run.failed
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    pdf = out / "report.pdf"
    assert pdf.read_bytes().startswith(b"%PDF")
    assert stat.S_IMODE(pdf.stat().st_mode) == 0o644
    assert stat.S_IMODE((out / "report.html").stat().st_mode) == 0o644


@pytest.mark.parametrize("name", ["report.html", "fields", "Study.json"])
def test_reserved_specimen_names(study_dir, name):
    text = (study_dir / "study.toml").read_text().replace("[specimens.P-4h]",
                                                          f'[specimens."{name}"]')
    (study_dir / "study.toml").write_text(text)
    with pytest.raises(StudyFileError, match=rf"'{name}' is the name of a study output"):
        load_study(study_dir / "study.toml")


def test_disk_full_mid_study_then_rerun_resumes(study_dir, tmp_path, monkeypatch):
    _trim(study_dir, ("S-600", "S-700"))
    import sectio.report._io as io_mod

    real_fsync, calls = io_mod.os.fsync, {"n": 0}

    def fsync(fd):
        calls["n"] += 1
        if calls["n"] > 2:  # the first field is saved, then the disk is full
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_fsync(fd)

    monkeypatch.setattr(io_mod.os, "fsync", fsync)
    out = tmp_path / "o"
    study = load_study(study_dir / "study.toml")
    with pytest.raises(OSError, match=rf"^Cannot write \S+ in {out}/fields: the disk is "
                                      r"full; free space"):
        run_study(study, out, workers=1, report=False)
    monkeypatch.setattr(io_mod.os, "fsync", real_fsync)
    saved = len(list((out / "fields").glob("*.json")))
    assert saved >= 1 and not list(out.rglob("*.tmp"))
    run = run_study(study, out, workers=1, report=False)
    assert run.reused == saved and run.ok


def test_parent_killed_workers_follow_and_rerun_is_identical(study_dir, tmp_path):
    """SIGKILL only the parent (not its group) while two workers run: none outlives it."""
    _trim(study_dir, ("S-600", "S-700"))
    ref = tmp_path / "ref"
    run_study(load_study(study_dir / "study.toml"), ref, workers=1, report=False)
    out = tmp_path / "killed"
    code = "import sys; from sectio.cli import main; sys.exit(main())"
    proc = subprocess.Popen(
        [sys.executable, "-c", code, "study", str(study_dir / "study.toml"), "--out", str(out),
         "--workers", "2", "--no-report"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True,
        env={**os.environ, "PYTHONWARNINGS": "ignore"})
    kids: set[int] = set()
    deadline = time.monotonic() + 90
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            kids |= _children(proc.pid)
            if list((out / "fields").glob("*.json")):
                break
            time.sleep(0.05)
        kids |= _children(proc.pid)
        os.kill(proc.pid, signal.SIGKILL)  # the parent alone
        proc.wait()
        assert len(kids) >= 2, "the workers never started"
        t0 = time.monotonic()
        while any(_alive(k) for k in kids) and time.monotonic() - t0 < 15:
            time.sleep(0.1)
        left = [k for k in kids if _alive(k)]
    finally:
        for k in kids:
            try:
                os.kill(k, signal.SIGKILL)
            except OSError:
                pass
    assert not left, f"processes outlived the killed run: {left}"
    res = run_cli("study", study_dir / "study.toml", "--out", out, "--workers", "1",
                  "--no-report")
    assert res.returncode == 0, res.stderr
    assert not list(out.rglob("*.tmp"))
    assert not (out / TMP_NAME).exists() or not any((out / TMP_NAME).iterdir())
    assert json_files(out) == json_files(ref)
    assert (out / LOCK_NAME).exists()
    assert json.loads((out / "study.json").read_text())["failed"] == []
