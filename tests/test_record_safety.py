"""Records that survive concurrency, faults and hostile text (kit.record.staging and friends).

- One writer per record folder: a second run fails at once (exit 2) or waits (``--wait``); a
  folder holds one design's records; a lock left by a dead run is detected.
- All-or-nothing sets: a run killed at any point (SIGKILL at seeded random times, SIGTERM, a
  full disk) leaves the previous set byte for byte or the whole new one, never a mix.
- Ids from the design file survive the id normaliser byte for byte; control characters in
  design text are escaped on the terminal.
- ``rotorbook sweep`` refuses grids over its caps before any work.

The tests that start a Jupyter kernel (``rotorbook record`` in a real process) carry the
``slow`` marker; each records only the small ``hover`` workbook.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import nbformat
import pytest

from kit.cli import MAX_SWEEP_POINTS, MAX_SWEEP_SPAN_M, check_sweep_options
from kit.cli import main as cli_main
from kit.design import load
from kit.errors import OptionError, RecordError
from kit.record import execute as ex
from kit.record import staging
from kit.record.staging import MANIFEST, RecordFolder, lock_path
from kit.textsafe import terminal_text

ROOT = Path(__file__).resolve().parents[1]
SURVEY = ROOT / "data" / "designs" / "survey_quad.toml"
HEX = ROOT / "data" / "designs" / "heavy_hex.toml"
PY = sys.executable
DEAD_PID = 2**22 + 12345  # above Linux's default pid_max (2^22): never a live process

kernel = pytest.mark.slow  # starts a Jupyter kernel in a real `rotorbook record` process


# -- helpers --------------------------------------------------------------------------------------


def _record_cmd(design: Path, out: Path, *extra: str) -> list[str]:
    return [PY, "-m", "kit.cli", "record", str(design), "--workbooks", "hover", "--out", str(out),
            *extra]


def _run(cmd: list[str], timeout: float = 600) -> subprocess.CompletedProcess:
    return subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=ROOT)


def _rotorbook_lines(stderr: str) -> list[str]:
    """The kit's own stderr lines (the kernel adds a transport warning of its own)."""
    return [ln for ln in stderr.splitlines() if ln.startswith("rotorbook:")]


def _snapshot(folder: Path) -> dict[str, str]:
    """Every file under ``folder``, relative name -> SHA-256 of its bytes."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _assert_whole_set(folder: Path, design_path: Path, workbooks=("hover",)) -> None:
    """``folder`` holds one complete record set of ``design_path`` and nothing else."""
    sha = load(design_path).sha256
    manifest = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
    assert manifest["sha256"] == sha
    expected = sorted([f"{w}.html" for w in workbooks] + [f"{w}.ipynb" for w in workbooks]
                      + ["index.html"])
    assert manifest["files"] == expected
    assert sorted(p.name for p in folder.iterdir()) == sorted(expected + [MANIFEST])
    for name in expected:
        text = (folder / name).read_text(encoding="utf-8")
        if name.endswith(".html"):
            assert text.rstrip().endswith("</html>"), name
            assert sha in text, name  # the header (and the index) name this design file
        else:
            nbformat.reads(text, as_version=4)  # a whole notebook


def _lock_owner(folder: Path) -> int | None:
    """The pid the lock file beside ``folder`` names, or None (no file, or released)."""
    try:
        raw = staging.lock_path(folder).read_text(encoding="utf-8")
        return int(json.loads(raw)["pid"]) if raw.strip() else None
    except (OSError, ValueError, KeyError, TypeError):
        return None


def _no_leftovers(folder: Path) -> None:
    beside = [p.name for p in folder.parent.iterdir()
              if p.name.startswith(f".{folder.name}.") and not p.name.endswith("rotorbook-lock")]
    assert beside == []


def _fake_set(folder: Path, design_path: Path, workbooks=("hover",)) -> dict[str, str]:
    """A small stand-in record set of ``design_path`` (what the checks before any work see)."""
    d = load(design_path)
    folder.mkdir(parents=True)
    for w in workbooks:
        (folder / f"{w}.html").write_text(f"<html>{w} {d.sha256}</html>\n", encoding="utf-8")
        (folder / f"{w}.ipynb").write_text("{}\n", encoding="utf-8")
    (folder / "index.html").write_text(f"<html>index {d.sha256}</html>\n", encoding="utf-8")
    (folder / MANIFEST).write_text(json.dumps({
        "schema": staging.MANIFEST_SCHEMA, "design_name": d.name, "revision": d.revision,
        "sha256": d.sha256, "files": sorted(p.name for p in folder.iterdir())}),
        encoding="utf-8")
    return _snapshot(folder)


def _children(pid: int) -> list[int]:
    kids = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                kids.append(int(entry.name))
    return kids


def _gone(pid: int, within_s: float) -> bool:
    end = time.monotonic() + within_s
    while time.monotonic() < end:
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            return True
        if state == "Z":
            return True
        time.sleep(0.2)
    return False


HOLDER = """
import sys, time
from kit.record.staging import RecordFolder
rf = RecordFolder(sys.argv[1])
rf.__enter__()
print("locked", flush=True)
time.sleep(float(sys.argv[2]))
rf.__exit__(None, None, None)
"""


def _hold(folder: Path, seconds: float) -> subprocess.Popen:
    """Another process that holds the folder's lock for ``seconds``."""
    p = subprocess.Popen([PY, "-c", HOLDER, str(folder), str(seconds)], stdout=subprocess.PIPE,
                         text=True, cwd=ROOT)
    assert p.stdout.readline().strip() == "locked"
    p.stdout.close()
    return p


# -- one writer per folder (no kernel) ------------------------------------------------------------


def test_out_naming_a_file_exits_2_with_one_line(tmp_path, capsys):
    target = tmp_path / "records"
    target.write_text("not a folder", encoding="utf-8")
    assert cli_main(["record", str(SURVEY), "--out", str(target)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--out" in err[0] and "is a file" in err[0]
    assert target.read_text(encoding="utf-8") == "not a folder"


def test_folder_holding_other_files_is_refused_even_with_force(tmp_path, capsys):
    out = tmp_path / "mixed"
    out.mkdir()
    (out / "design.toml").write_text("x", encoding="utf-8")
    assert cli_main(["record", str(SURVEY), "--out", str(out), "--force"]) == 2
    assert "'design.toml', which is not a record" in capsys.readouterr().err
    assert sorted(p.name for p in out.iterdir()) == ["design.toml"]


def test_current_folder_is_refused(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert cli_main(["record", str(SURVEY), "--out", "."]) == 2
    assert "current folder" in capsys.readouterr().err


def test_another_designs_set_is_refused_without_force(tmp_path, capsys):
    out = tmp_path / "records"
    before = _fake_set(out, HEX, workbooks=("hover", "design_review"))
    assert cli_main(["record", str(SURVEY), "--workbooks", "hover", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "Demo heavy-lift hexacopter" in err and "--force" in err
    assert _snapshot(out) == before
    _no_leftovers(out)


def test_existing_record_of_the_same_design_needs_force(tmp_path, capsys):
    out = tmp_path / "records"
    before = _fake_set(out, SURVEY)
    assert cli_main(["record", str(SURVEY), "--workbooks", "hover", "--out", str(out)]) == 2
    assert "record exists" in capsys.readouterr().err
    assert _snapshot(out) == before


def test_second_writer_stops_at_once_and_a_dead_owner_is_detected(tmp_path, capsys):
    out = tmp_path / "records"
    holder = _hold(out, 120)
    try:
        assert cli_main(["record", str(SURVEY), "--workbooks", "hover", "--out", str(out)]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1
        assert "being written by another rotorbook record run" in err[0]
        assert f"pid {holder.pid}" in err[0] and "--wait" in err[0]
    finally:
        holder.kill()  # SIGKILL: the lock file still names it, the OS has dropped the lock
        holder.wait()
    (out.parent / f".{out.name}.staging-{holder.pid}-0123abcd").mkdir()
    with RecordFolder(out) as rf:
        assert len(rf.notes) == 1 and f"pid {holder.pid}" in rf.notes[0]
        assert "stopped without finishing" in rf.notes[0]
    _no_leftovers(out)
    with RecordFolder(out) as rf:  # a clean hand-over leaves no note
        assert rf.notes == []


def test_wait_queues_behind_the_holder(tmp_path):
    out = tmp_path / "records"
    holder = _hold(out, 1.0)
    with RecordFolder(out, wait=True) as rf:
        assert holder.wait(timeout=30) == 0  # it had released the lock before we got it
        assert rf.notes == []
    json.loads(lock_path(out).read_text() or "{}")


def test_half_swap_left_by_a_dead_run_is_put_back(tmp_path):
    out = tmp_path / "records"
    before = _fake_set(out, SURVEY)
    # died between the two renames of the fallback swap: the set sits under .previous-*
    os.rename(out, tmp_path / f".records.previous-{DEAD_PID}-00aa11bb")
    (tmp_path / f".records.staging-{DEAD_PID}-22cc33dd").mkdir()
    with RecordFolder(out):
        pass
    assert _snapshot(out) == before
    _no_leftovers(out)


@pytest.mark.parametrize("atomic_exchange", [True, False], ids=["renameat2", "two-renames"])
def test_commit_swaps_the_whole_set(tmp_path, monkeypatch, atomic_exchange):
    if not atomic_exchange:
        monkeypatch.setattr(staging, "exchange", lambda a, b: False)
    out = tmp_path / "records"
    _fake_set(out, HEX, workbooks=("hover", "design_review"))
    d = load(SURVEY)
    with RecordFolder(out) as rf:
        stage = rf.prepare(d, ["hover"], force=True)
        assert sorted(os.listdir(stage)) == []  # another design: nothing carried over
        for name in ("hover.html", "hover.ipynb", "index.html"):
            (stage / name).write_text(f"<html>{d.sha256}</html>\n", encoding="utf-8")
        rf.commit(d)
    manifest = json.loads((out / MANIFEST).read_text(encoding="utf-8"))
    assert manifest["sha256"] == d.sha256
    assert sorted(p.name for p in out.iterdir()) == \
        sorted([MANIFEST, "hover.html", "hover.ipynb", "index.html"])
    _no_leftovers(out)


def test_same_design_keeps_its_other_records(tmp_path):
    out = tmp_path / "records"
    before = _fake_set(out, SURVEY, workbooks=("hover", "design_review"))
    d = load(SURVEY)
    with RecordFolder(out) as rf:
        stage = rf.prepare(d, ["hover"], force=True)
        assert sorted(os.listdir(stage)) == ["design_review.html", "design_review.ipynb"]
    _no_leftovers(out)
    assert _snapshot(out) == before  # not committed: nothing changed


# -- write failures -------------------------------------------------------------------------------


@pytest.fixture
def small_disk(tmp_path):
    """A 1 MiB tmpfs when this test may mount one (root); else None."""
    mnt = tmp_path / "disk"
    mnt.mkdir()
    if os.geteuid() != 0 or shutil.which("mount") is None:
        yield None
        return
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        yield None
        return
    try:
        yield mnt
    finally:
        subprocess.run(["umount", "-l", str(mnt)], capture_output=True)


def test_full_disk_while_staging_leaves_the_previous_set(small_disk, tmp_path, monkeypatch):
    base = small_disk if small_disk is not None else tmp_path
    out = base / "records"
    before = _fake_set(out, SURVEY)
    d = load(SURVEY)
    big = "x" * (2 << 20)  # 2 MiB: more than the small disk holds
    if small_disk is None:  # no tmpfs: the write error is injected at the file layer
        def full(path, text):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
        monkeypatch.setattr(staging, "write_atomic", full)
    with pytest.raises(RecordError, match="No space left on device") as info:
        with RecordFolder(out) as rf:
            stage = rf.prepare(d, ["hover"], force=True)
            (stage / "hover.html").write_text(big, encoding="utf-8")
            rf.commit(d)
    assert "\n" not in str(info.value) and "--out" in str(info.value)
    assert _snapshot(out) == before
    _no_leftovers(out)


def test_read_only_file_system_exits_2_with_one_line(small_disk, capsys):
    if small_disk is None:
        pytest.skip("needs a tmpfs mount (root); the full-disk test injects its error instead")
    out = small_disk / "records"
    before = _fake_set(out, SURVEY)
    r = subprocess.run(["mount", "-o", "remount,ro", str(small_disk)], capture_output=True)
    assert r.returncode == 0, r.stderr
    assert cli_main(["record", str(SURVEY), "--workbooks", "hover", "--out", str(out),
                     "--force"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "Read-only file system" in err[0] and "--out" in err[0]
    assert _snapshot(out) == before


# -- design text verbatim, terminal text escaped --------------------------------------------------


def test_id_map_keeps_design_ids_and_renumbers_generated_ones():
    design_uuid, design_hex = "b0000003-aaaa-4bbb-8ccc-0123456789ab", "0123456789abcdef" * 2
    made_uuid, made_hex = "9e8d7c6b-5a49-4837-8261-504f3e2d1c0b", "f" * 31 + "0"
    ids = ex.IdMap(keep={design_uuid, design_hex})
    text = f"{made_uuid} {design_uuid.upper()} {design_hex} {made_hex} {made_uuid}"
    out = ids(text)
    assert design_uuid.upper() in out and design_hex in out
    assert made_uuid not in out and made_hex not in out
    assert out.split()[0] == out.split()[4] == "b0000001-0000-4000-8000-000000000000"
    assert out.split()[3] == "0" * 31 + "2"


def test_design_ids_include_toml_escapes_and_the_path(tmp_path):
    path = tmp_path / "d-0f3a5b1e-1c2d-4e5f-8a9b-0c1d2e3f4a5b.toml"
    # \u0030 is "0": the parsed string holds a 32-digit hex id the raw text does not show
    path.write_text('[design]\nname = "\\u0030123456789abcdef0123456789abcdef"\n'
                    'revision = "A"\n', encoding="utf-8")
    keep = ex.design_ids(path)
    assert "0123456789abcdef0123456789abcdef" in keep
    assert "0f3a5b1e-1c2d-4e5f-8a9b-0c1d2e3f4a5b" in keep


def test_terminal_text_escapes_every_control_character():
    evil = "A\x1b]0;owned\x07\x1b[2J\x1b[1A\rall checks PASS\x9b2J\u202eZ\x7f\nend"
    out = terminal_text(evil)
    assert not re.search("[\x00-\x1f\x7f-\x9f\u202e]", out)
    assert out == ("A\\x1b]0;owned\\x07\\x1b[2J\\x1b[1A\\x0dall checks PASS\\x9b2J\\u202eZ"
                   "\\x7f\\x0aend")
    assert terminal_text(evil, keep_newlines=True).endswith("\\x7f\nend")
    assert terminal_text("Größe ±5 mm") == "Größe ±5 mm"


ANSI_NAME = r"Evil \u001b]0;owned\u0007\u001b[2J\u001b[1A\rall checks PASS"


def test_ansi_escapes_in_design_text_are_escaped_on_the_terminal(tmp_path, capsys):
    text = SURVEY.read_text(encoding="utf-8")
    path = tmp_path / "ansi.toml"
    path.write_text(text.replace('name = "Demo survey quad"', f'name = "{ANSI_NAME}"')
                    .replace('name = "front_left"', 'name = "front_left\\u001b[31m"')
                    .replace('"front_left"', '"front_left\\u001b[31m"')
                    .replace("front_left =", '"front_left\\u001b[31m" ='), encoding="utf-8")
    assert cli_main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\r" not in out and "\x07" not in out
    assert "Evil \\x1b]0;owned\\x07\\x1b[2J\\x1b[1A\\x0dall checks PASS" in out
    assert "front_left\\x1b[31m" in out
    # error lines are escaped too (here the file name itself carries the escape)
    assert cli_main(["check", str(tmp_path / "x\x1b[2Jy.toml")]) == 2
    err = capsys.readouterr().err
    assert "\x1b" not in err and "x\\x1b[2Jy.toml" in err


# -- sweep caps -----------------------------------------------------------------------------------


@pytest.mark.parametrize("points", [MAX_SWEEP_POINTS + 1, 1, 10000])
def test_sweep_points_over_the_cap_exit_2(points, capsys):
    argv = ["sweep", str(SURVEY), "--part", "battery", "--points", str(points)]
    assert cli_main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("rotorbook: --points:")


@pytest.mark.parametrize("span", ["nan", "inf", "-inf", "1e300", "0", "-0.01",
                                  repr(MAX_SWEEP_SPAN_M * (1 + 1e-9))])
def test_sweep_span_not_finite_positive_or_over_the_cap_exits_2(span, capsys):
    argv = ["sweep", str(SURVEY), "--part", "battery", f"--span-m={span}"]
    assert cli_main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("rotorbook: --span-m:")


def test_sweep_caps_themselves_are_allowed():
    check_sweep_options(MAX_SWEEP_POINTS, MAX_SWEEP_SPAN_M)
    check_sweep_options(2, 1e-6)
    with pytest.raises(OptionError):
        check_sweep_options(MAX_SWEEP_POINTS + 1, MAX_SWEEP_SPAN_M)


# -- real `rotorbook record` processes ------------------------------------------------------------


@pytest.fixture(scope="module")
def hex_set(tmp_path_factory):
    """A complete record set of the heavy hexacopter's hover workbook, and its duration in s."""
    out = tmp_path_factory.mktemp("hexset") / "records"
    t0 = time.monotonic()
    r = _run(_record_cmd(HEX, out))
    assert r.returncode == 0, r.stderr
    return out, time.monotonic() - t0


def _copy_set(src: Path, dst: Path) -> dict[str, str]:
    shutil.copytree(src, dst)
    return _snapshot(dst)


@kernel
def test_two_concurrent_runs_into_one_folder(tmp_path):
    out = tmp_path / "records"
    runs = {d: subprocess.Popen(_record_cmd(d, out), stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True, cwd=ROOT)
            for d in (SURVEY, HEX)}
    results = {}
    for d, p in runs.items():
        stdout, stderr = p.communicate(timeout=600)
        results[d] = (p.returncode, stdout, stderr)
    codes = sorted(rc for rc, _, _ in results.values())
    assert codes == [0, 2], results
    winner = next(d for d, (rc, _, _) in results.items() if rc == 0)
    loser_err = next(err for rc, _, err in results.values() if rc == 2)
    lines = _rotorbook_lines(loser_err)
    assert len(lines) == 1 and "being written by another rotorbook record run" in lines[0]
    _assert_whole_set(out, winner)
    _no_leftovers(out)


@kernel
def test_sigkill_at_seeded_points_never_leaves_a_half_set(hex_set, tmp_path):
    src, duration = hex_set
    out = tmp_path / "records"
    previous = _copy_set(src, out)
    rng = random.Random(15)
    delays = sorted(rng.uniform(0.05, 1.2) * duration for _ in range(4))
    outcomes, killed, kernels = [], [], []
    for delay in delays:
        p = subprocess.Popen(_record_cmd(SURVEY, out, "--force"), stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL, cwd=ROOT)
        end, kids = time.monotonic() + delay, []
        while p.poll() is None and time.monotonic() < end:
            kids = _children(p.pid)
            time.sleep(0.1)
        if p.poll() is None:
            p.kill()
            p.wait()
            # a kill between the release of the lock and the exit of the process leaves
            # no owner behind; only a kill while the run held the folder leaves its pid
            owner = _lock_owner(out)
            outcomes.append(("killed" if owner == p.pid else "killed, folder not held",
                             round(delay, 1)))
            killed.append(p.pid)
            kernels += kids
        else:
            outcomes.append(("finished", p.returncode))
        if _snapshot(out) == previous:
            continue  # the previous set, byte for byte
        _assert_whole_set(out, SURVEY)  # else the whole new set, nothing of the old one
        previous = _snapshot(out)
    print(f"SIGKILL outcomes (full run {duration:.1f} s; delay s):", outcomes)
    assert any(kind.startswith("killed") for kind, _ in outcomes)
    # the next run clears what the killed ones left beside the folder
    r = _run(_record_cmd(SURVEY, out, "--force"))
    assert r.returncode == 0, r.stderr
    _assert_whole_set(out, SURVEY)
    _no_leftovers(out)
    if outcomes[-1][0] == "killed":
        assert r.stdout.startswith(f"note: a previous run into {str(out)!r} (pid {killed[-1]}")
    else:  # the last run ended cleanly, or was killed outside the lock: nothing to report
        assert "a previous run into" not in r.stdout
    # the kernels of killed runs end (ipykernel watches its parent); their temporary
    # folders (kernelspec, connection files) are removed by the next run
    assert all(_gone(k, 30) for k in kernels)
    tmp_root = Path(os.environ.get("TMPDIR", "/tmp"))
    assert [d for pid in killed for d in tmp_root.glob(f"rotorbook-kernel-{pid}-*")] == []


@kernel
def test_sigterm_cleans_the_kernel_its_files_and_the_staging_folder(hex_set, tmp_path):
    out = tmp_path / "records"
    previous = _copy_set(hex_set[0], out)
    p = subprocess.Popen(_record_cmd(SURVEY, out, "--force"), stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True, cwd=ROOT)
    tmp_root = Path(os.environ.get("TMPDIR", "/tmp"))
    conn, kids = [], []
    end = time.monotonic() + 300
    while time.monotonic() < end and p.poll() is None and not (conn and kids):
        conn = list(tmp_root.glob(f"rotorbook-kernel-{p.pid}-*/kernel-*.json"))
        kids = _children(p.pid)
        time.sleep(0.2)
    assert conn and kids, "the kernel never started"
    time.sleep(1.0)
    p.send_signal(signal.SIGTERM)
    _, err = p.communicate(timeout=120)
    assert p.returncode == 143, err
    assert _rotorbook_lines(err) == [
        "rotorbook: stopped by SIGTERM; nothing half written was left behind"]
    assert _snapshot(out) == previous
    _no_leftovers(out)
    assert not any(c.exists() for c in conn)
    assert list(tmp_root.glob(f"rotorbook-kernel-{p.pid}-*")) == []
    assert all(_gone(k, 30) for k in kids)


INJECT_FULL_DISK = """
import errno, os, sys
import kit.record.render as render
real = render.write_atomic
def write_atomic(path, text):
    if str(path).endswith(".html"):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
    real(path, text)
render.write_atomic = write_atomic
from kit.cli import main
sys.exit(main(sys.argv[1:]))
"""


@kernel
def test_full_disk_during_a_record_run_exits_2_and_changes_nothing(small_disk, tmp_path):
    if small_disk is not None:
        out = small_disk / "records"
        previous = _fake_set(out, SURVEY)  # small; the hover record (about 2 MB) does not fit
        cmd = _record_cmd(SURVEY, out, "--force")
    else:
        out = tmp_path / "records"
        previous = _fake_set(out, SURVEY)
        cmd = [PY, "-c", INJECT_FULL_DISK] + _record_cmd(SURVEY, out, "--force")[3:]
    r = _run(cmd)
    assert r.returncode == 2, r.stderr
    lines = _rotorbook_lines(r.stderr)
    assert len(lines) == 1 and "No space left on device" in lines[0], r.stderr
    assert "Traceback" not in r.stderr
    assert _snapshot(out) == previous
    _no_leftovers(out)


@kernel
def test_uuids_and_hex_in_every_string_field_survive_byte_for_byte(tmp_path):
    tokens = iter([
        "0123456789abcdef0123456789abcdef", "b0000003-0000-4000-8000-000000000000",
        "0F3A5B1E-1C2D-4E5F-8A9B-0C1D2E3F4A5B", "ffffffffffffffffffffffffffffffff",
        "b0000001-0000-4000-8000-000000000000", "00000000000000000000000000000001",
    ] + [f"{i:02x}" + "c0ffee" * 5 for i in range(40)])
    text = SURVEY.read_text(encoding="utf-8")
    values: dict[str, str] = {}

    def swap(m: re.Match) -> str:
        key, old = m.group(1), m.group(2)
        new = f"F{len(values):02d}:{next(tokens)}"
        values[new] = old
        return f'{key} = "{new}"'

    text = re.sub(r'(?m)^(name|revision|prepared_by|checked_by|notes) = "([^"]*)"', swap, text)
    for new, old in values.items():  # rotor names are referenced by the failure cases
        text = text.replace(f'"{old}"', f'"{new}"').replace(f"{old} =", f'"{new}" =')
    design = tmp_path / "ids-0f3a5b1e.toml"
    design.write_text(text, encoding="utf-8")
    out = tmp_path / "records"
    r = _run(_record_cmd(design, out))
    assert r.returncode == 0, r.stderr
    seen: set[str] = set()
    for name in ("hover.html", "hover.ipynb", "index.html"):
        page = (out / name).read_text(encoding="utf-8")
        found = set()
        for m in re.finditer(r"F(\d\d):", page):
            marker = m.group(0)
            token = next(v for v in values if v.startswith(marker))
            assert page[m.start():m.start() + len(token)] == token, (name, token)
            found.add(token)
        assert found, name
        seen |= found
    d = load(design)
    assert {d.name, d.revision} <= seen
    assert {r.name for r in d.rotors} <= seen
