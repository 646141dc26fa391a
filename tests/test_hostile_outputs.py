"""Hostile output paths and interrupts through the command line (issue 15): an output that is
an input (or another output) is refused before anything is computed, special files stay
special, write errors name the user's path, outputs are written only after the computation,
Ctrl-C is one line and status 130, a scenario that is not UTF-8 is one line naming the byte
offset, and the explorer's save buttons answer a bad path with a plain status line.

The outside references are the operating system's own views of the files: ``os.stat`` and
the ``stat`` module for what a path is (FIFO, link, device, inode), the bytes read back, the
exit status and stderr of a real ``python -m tiltwell`` process sent SIGINT, and offsets
found with ``bytes.index`` / Python's own UTF-8 decoder.
"""

from __future__ import annotations

import errno
import os
import signal
import stat
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from tiltwell import scenario as sc
from tiltwell.cli import main
from tiltwell.workflows.demo import demo_scenario

#: Options and their values that make a run cheap (about 0.3 s): the demo's ideal quadrupole.
SWEEP = ["--start", "1e4", "--stop", "2e4", "--points", "2", "--quiet"]


def small(detector: bool = False) -> sc.Scenario:
    """The demo's [trap] quadrupole alone, untracked, with few samples (~0.3 s a run)."""
    data = demo_scenario().to_dict()
    data.pop("coils")
    if not detector:
        data.pop("detector")
    for name in ("pressure", "seed_fraction", "rotational_temperature"):
        data["beam"].pop(name)
    data["simulation"].update({"track": False, "samples": 401, "particles": 2000})
    return sc.from_dict(data)


@pytest.fixture
def scenario(tmp_path: Path) -> Path:
    return sc.save(small(), tmp_path / "s.toml")


def refused(capsys: pytest.CaptureFixture[str], argv: list[str], *words: str) -> str:
    """Run the CLI, assert status 2 and one stderr line without a traceback that holds
    every word; return the line."""
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("tiltwell: error: "), err
    assert "Traceback" not in err
    for word in words:
        assert word in err, (word, err)
    return err


# ---- outputs that are inputs ---------------------------------------------------------------


@pytest.mark.parametrize("how", ["same", "symlink", "hardlink", "dotted"])
def test_an_output_that_is_the_scenario_is_refused_for_every_output_option(
        scenario: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str], how: str) -> None:
    before = scenario.read_bytes()
    alias = {"same": scenario, "symlink": tmp_path / "link.csv", "hardlink": tmp_path / "hard.csv",
             "dotted": tmp_path / "sub" / ".." / "s.toml"}[how]
    if how == "symlink":
        alias.symlink_to(scenario)
    elif how == "hardlink":
        os.link(scenario, alias)
    elif how == "dotted":
        (tmp_path / "sub").mkdir()
    for argv, option in ((["run", str(scenario), "--timing", str(alias)], "--timing"),
                         (["run", str(scenario), "--trace", str(alias)], "--trace"),
                         (["sweep", str(scenario), *SWEEP, "--out", str(alias)], "--out"),
                         (["coils", str(scenario), "--csv", str(alias)], "--csv"),
                         (["calibrate", str(scenario), "--trace", "t.csv", "--figure", str(alias)], "--figure"),
                         (["calibrate", str(scenario), "--trace", "t.csv", "--write", str(alias)], "--write")):
        refused(capsys, argv, option, str(alias), str(scenario), "same file")
        assert scenario.read_bytes() == before
    assert stat.S_ISLNK(os.lstat(alias).st_mode) == (how == "symlink")


def test_two_outputs_of_one_call_may_not_be_the_same_file(scenario: Path, tmp_path: Path,
                                                          capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out.csv"
    refused(capsys, ["run", str(scenario), "--timing", str(out), "--trace", str(out)], "--trace", "--timing")
    trace = tmp_path / "t.csv"
    trace.write_bytes(b"0.0,1\n")
    refused(capsys, ["calibrate", str(scenario), "--trace", str(trace), "--write", str(out), "--figure", str(out)],
            "--figure", "--write")
    # --force lets --write replace the scenario, never a trace
    refused(capsys, ["calibrate", str(scenario), "--trace", str(trace), "--write", str(trace), "--force"],
            "--write", "--trace")
    assert not out.exists() and trace.read_bytes() == b"0.0,1\n"


def test_an_output_folder_holding_an_input_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    folder = tmp_path / "out"
    folder.mkdir()
    text = sc.dumps(small())
    figure = folder / "potential.png"  # a scenario with the name of one of the figures
    figure.write_text(text)
    refused(capsys, ["figures", str(figure), "--out", str(folder), "--formats", "png"], "--out", str(figure))
    refused(capsys, ["coils", str(figure), "--figures", str(folder)], "--figures", str(figure))
    for name in ("points.jsonl", "search.csv", "search.nc", "optimum.json", "optimum.toml"):
        inside = folder / name
        inside.write_text(text)
        refused(capsys, ["search", str(inside), "--vary", "deceleration.deceleration=1e4:2e4:2", "--out", str(folder)],
                "--out", name)
        assert inside.read_text() == text
        inside.unlink()
    elsewhere = sc.save(small(), tmp_path / "plan.toml")
    os.link(elsewhere, folder / "search.csv")  # a hard link under a name the search writes
    refused(capsys, ["search", str(elsewhere), "--vary", "deceleration.deceleration=1e4:2e4:2", "--out", str(folder)],
            "--out", str(elsewhere))
    assert figure.read_text() == text and elsewhere.read_text() == text
    assert sorted(path.name for path in folder.iterdir()) == ["potential.png", "search.csv"]


# ---- special files, links, errors and stale temporary files --------------------------------


def test_a_fifo_is_written_into_and_stays_a_fifo(scenario: Path, tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    fifo = tmp_path / "timing.csv"
    os.mkfifo(fifo)
    received: list[bytes] = []
    reader = threading.Thread(target=lambda: received.append(fifo.read_bytes()), daemon=True)
    reader.start()
    assert main(["run", str(scenario), "--timing", str(fifo), "--json"]) == 0
    reader.join(timeout=60)
    assert not reader.is_alive()
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    assert received[0].startswith(b"# tiltwell coil timing") and received[0].count(b"\n") > 5
    assert sorted(path.name for path in tmp_path.iterdir()) == ["s.toml", "timing.csv"]


def test_a_symlink_stays_a_link_and_its_target_is_replaced(scenario: Path, tmp_path: Path,
                                                           capsys: pytest.CaptureFixture[str]) -> None:
    real = tmp_path / "real.csv"
    real.write_bytes(b"old\n")
    os.chmod(real, 0o640)
    link = tmp_path / "link.csv"
    link.symlink_to(real.name)
    assert main(["run", str(scenario), "--timing", str(link), "--json"]) == 0
    assert stat.S_ISLNK(os.lstat(link).st_mode) and os.readlink(link) == "real.csv"
    assert real.read_bytes().startswith(b"# tiltwell coil timing")
    assert stat.S_IMODE(os.stat(real).st_mode) == 0o640  # the mode of the file it replaced


def test_a_character_device_is_written_into_not_replaced(scenario: Path, tmp_path: Path,
                                                         capsys: pytest.CaptureFixture[str]) -> None:
    """A node with the null device's numbers (Linux 1, 3) made in tmp_path: never the real one."""
    node = tmp_path / "sink.csv"
    try:
        os.mknod(node, 0o666 | stat.S_IFCHR, os.makedev(1, 3))
        with open(node, "wb") as stream:
            stream.write(b"probe")
    except (OSError, AttributeError) as error:  # not root, or a nodev mount
        pytest.skip(f"cannot make a character device here: {error}")
    assert main(["run", str(scenario), "--timing", str(node), "--json"]) == 0
    assert stat.S_ISCHR(os.stat(node).st_mode) and os.stat(node).st_rdev == os.makedev(1, 3)
    assert sorted(path.name for path in tmp_path.iterdir()) == ["s.toml", "sink.csv"]


def test_a_folder_and_bad_names_are_refused_naming_the_path(scenario: Path, tmp_path: Path,
                                                            capsys: pytest.CaptureFixture[str]) -> None:
    folder = tmp_path / "folder"
    folder.mkdir()
    long_name = tmp_path / ("x" * 300 + ".csv")
    for target, word in ((folder, "folder"), (long_name, "too long"), (tmp_path / "missing" / "a.csv", "folder"),
                         ("", "not a file name"), (f"{tmp_path}/   ", "not a file name")):
        err = refused(capsys, ["run", str(scenario), "--timing", str(target)], repr(str(target)), word)
        assert ".tmp" not in err
    assert folder.is_dir() and not any(folder.iterdir())
    assert sorted(path.name for path in tmp_path.iterdir()) == ["folder", "s.toml"]


def test_a_write_error_names_the_users_path_and_keeps_the_old_file(
        scenario: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    target = tmp_path / "timing.csv"
    target.write_bytes(b"old\n")

    def full(descriptor: int) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "fsync", full)
    err = refused(capsys, ["run", str(scenario), "--timing", str(target)], repr(str(target)),
                  os.strerror(errno.ENOSPC))
    assert ".tmp" not in err and ": :" not in err
    assert target.read_bytes() == b"old\n"
    assert sorted(path.name for path in tmp_path.iterdir()) == ["s.toml", "timing.csv"]


def test_an_oserror_without_a_file_name_prints_no_empty_name(
        scenario: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    from tiltwell.cli import commands

    def broken(*args: object, **kwargs: object) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(commands, "summarise_parts", broken)
    err = refused(capsys, ["run", str(scenario)], os.strerror(errno.ENOSPC))
    assert err == f"tiltwell: error: {os.strerror(errno.ENOSPC)}\n"


def test_stale_temporary_files_of_our_pattern_are_removed_and_live_ones_kept(
        scenario: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Left by a kill between write and rename: ``.NAME.<8 of [a-z0-9_]>.tmp`` (tempfile's
    mkstemp names). Older than a minute goes; a fresh one (a concurrent write) and files of
    other shapes stay."""
    old = time.time() - 3600
    stale, live = tmp_path / ".t.csv.ab12_xyz.tmp", tmp_path / ".t.csv.cd34efgh.tmp"
    others = [tmp_path / ".t.csv.short.tmp", tmp_path / ".u.csv.ab12_xyz.tmp", tmp_path / "t.csv.ab12_xyz.tmp"]
    for path in (stale, live, *others):
        path.write_bytes(b"partial")
        if path is not live:
            os.utime(path, (old, old))
    assert main(["run", str(scenario), "--timing", str(tmp_path / "t.csv"), "--json"]) == 0
    assert not stale.exists() and live.exists() and all(path.exists() for path in others)


# ---- compute first, write last -------------------------------------------------------------


def test_outputs_are_written_only_after_the_computation_succeeds(
        tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    from tiltwell.cli import commands
    from tiltwell import TiltwellError

    path = sc.save(small(detector=True), tmp_path / "d.toml")
    timing, trace = tmp_path / "timing.csv", tmp_path / "trace.csv"
    real = commands.summarise_parts

    def failing(*args: object, **kwargs: object) -> None:
        raise TiltwellError("the computation failed")

    monkeypatch.setattr(commands, "summarise_parts", failing)
    refused(capsys, ["run", str(path), "--timing", str(timing), "--trace", str(trace)], "the computation failed")
    assert not timing.exists() and not trace.exists()
    monkeypatch.setattr(commands, "summarise_parts", real)
    assert main(["run", str(path), "--timing", str(timing), "--trace", str(trace), "--json"]) == 0
    assert timing.read_bytes().startswith(b"# tiltwell coil timing") and trace.stat().st_size > 100


# ---- messages: sweep limits, Ctrl-C, non-UTF-8 scenarios -----------------------------------


@pytest.mark.parametrize("points", ["-1", "0", "1000000000"])
def test_sweep_points_outside_the_limits_are_one_line(scenario: Path, capsys: pytest.CaptureFixture[str],
                                                      points: str) -> None:
    argv = ["sweep", str(scenario), "--start", "1e4", "--stop", "2e4", "--points", points]
    refused(capsys, argv, "--points", "[1, 100000]", points)


def test_sweep_workers_above_the_cores_are_refused(scenario: Path, capsys: pytest.CaptureFixture[str]) -> None:
    cores = os.cpu_count() or 1
    refused(capsys, ["sweep", str(scenario), *SWEEP, "--workers", str(cores + 1)], "--workers", f"[1, {cores}]",
            "cores")


def children(pid: int) -> list[int]:
    """Child processes of ``pid`` that are alive (Linux /proc; a zombie counts as ended)."""
    try:
        listed = Path(f"/proc/{pid}/task/{pid}/children").read_text().split()
    except OSError:
        return []
    return [int(child) for child in listed if alive(int(child))]


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return False
    return state != "Z"


@pytest.mark.skipif(not Path("/proc/self/task").exists() or (os.cpu_count() or 1) < 2,
                    reason="needs Linux /proc and two cores")
def test_ctrl_c_in_a_sweep_with_workers_is_one_line_status_130_and_stops_them(scenario: Path,
                                                                              tmp_path: Path) -> None:
    """SIGINT to the whole process group, as a terminal's Ctrl-C sends it: workers too."""
    out = tmp_path / "sweep.csv"
    child = subprocess.Popen([sys.executable, "-m", "tiltwell", "sweep", str(scenario), "--start", "1e4", "--stop",
                              "2e4", "--points", "5000", "--workers", "2", "--quiet", "--out", str(out)],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        while len(children(child.pid)) < 2 and time.monotonic() < deadline:
            time.sleep(0.05)
        workers = children(child.pid)
        assert len(workers) == 2
        time.sleep(1.0)  # points running in both workers
        os.killpg(child.pid, signal.SIGINT)
        stdout, stderr = child.communicate(timeout=60)  # a hang guard, not a speed target
    finally:
        if child.poll() is None:
            child.kill()
            child.communicate()
    assert child.returncode == 130
    assert stderr == "tiltwell: interrupted (Ctrl-C)\n" and stdout == ""
    deadline = time.monotonic() + 30
    while any(alive(pid) for pid in workers) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not any(alive(pid) for pid in workers)
    assert not out.exists()


def test_ctrl_c_in_any_command_is_status_130_and_one_line(scenario: Path, capsys: pytest.CaptureFixture[str],
                                                          monkeypatch: pytest.MonkeyPatch) -> None:
    from tiltwell.cli import commands

    def interrupted(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(commands, "summarise_parts", interrupted)
    try:
        status = main(["run", str(scenario)])
    except KeyboardInterrupt:  # escaped main(): a traceback in a terminal
        pytest.fail("KeyboardInterrupt escaped tiltwell.cli.main")
    assert status == 130
    assert capsys.readouterr().err == "tiltwell: interrupted (Ctrl-C)\n"


@pytest.mark.parametrize("kind", ["latin-1", "utf-16", "binary"])
def test_a_scenario_that_is_not_utf8_is_one_line_naming_the_byte_offset(
        tmp_path: Path, capsys: pytest.CaptureFixture[str], kind: str) -> None:
    text = sc.dumps(small()).replace("[trap]", "# caf\u00e9 lab\n[trap]")
    data = {"latin-1": text.encode("latin-1"), "utf-16": text.encode("utf-16"),
            "binary": b"\x89PNG\r\n\x1a\n" + bytes(range(256))}[kind]
    path = tmp_path / "bad.toml"
    path.write_bytes(data)
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as error:  # Python's own decoder says where the first bad byte is
        offset = error.start
    expected = {"latin-1": data.index(b"\xe9"), "utf-16": 0, "binary": 0}[kind]
    assert offset == expected
    refused(capsys, ["run", str(path)], str(path), f"offset {offset}", "UTF-8")
    assert path.read_bytes() == data


def test_a_utf8_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    text = sc.dumps(small())
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    assert sc.load(path) == sc.loads(text)


# ---- the explorer's save buttons -----------------------------------------------------------


def test_explorer_save_buttons_answer_a_bad_path_with_a_status_line(tmp_path: Path) -> None:
    pytest.importorskip("ipywidgets")
    from tiltwell.explorer import explore

    app = explore(small(), auto_tradeoff=False)
    try:
        afile = tmp_path / "a.toml"
        afile.write_bytes(b"keep")
        bad = ["/proc/x.toml", str(tmp_path), "", "   ", str(tmp_path / ("x" * 300 + ".toml"))]
        for value in bad:
            app.actions["scenario_path"].value = value
            app.actions["save_scenario"].click()
            assert app.status.value and "saved" not in app.status.value, value
        for value in ["/proc/x", "", "   ", str(afile), str(tmp_path / ("x" * 300))]:
            app.actions["figures_path"].value = value
            app.actions["save_figures"].click()
            assert "folder" in app.status.value, value
        with pytest.raises(ValueError, match="folder"):
            app.save_html(tmp_path)
        assert app.errors == [] and "internal error" not in app.message.value
        assert afile.read_bytes() == b"keep" and sorted(p.name for p in tmp_path.iterdir()) == ["a.toml"]
    finally:
        app.close()
