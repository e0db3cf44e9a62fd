"""What cwlimits may write and delete (issue 14, items 1-6 and 17), through cwlimits.cli.main.

The rules checked here are the README's "What cwlimits may delete, and when": a report
folder is replaced only if cwlimits made it (its manifest lists every file it holds);
anything else is refused with exit code 2 before any work, and ``--overwrite`` adds the
report without deleting a file the manifest does not list; ``store --clear`` deletes only a
verifiable store; output paths are checked before any work; the results store appears only
once the inputs were accepted; two processes share one store's chunks; and every file is
written with the mode the umask gives (POSIX ``open(2)``: 0666 & ~umask for files, 0777 &
~umask for folders; common practice).
"""

import json
import os
import pathlib
import signal
import sqlite3
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest

from cwlimits.cli.app import main
from cwlimits.report.html import MANIFEST_NAME
from cwlimits.runtime.store import STORE_NAME, ResultStore, is_store, open_store
from cwlimits.searchspace.searchsetup import SearchSetup

HERE = pathlib.Path(__file__).parent
ROOT = HERE.parent
CATALOGUE = ROOT / "target_lists" / "demo.csv"
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0
# A folder no process can create files in, even a superuser's (Linux pseudo file system).
UNWRITABLE = pathlib.Path("/proc")

CONFIG = """title = "fictional quick report"
{output}
[catalogue]
path = "cat.csv"
targets = ["{target}"]
[data]
span = "40 day"
[search]
setup = "setup.toml"
[planning]
max_targets = 1
"""


def snapshot(folder):
    """Every path under ``folder`` (links not followed) with its bytes or link target."""
    out = {}
    for path in sorted(pathlib.Path(folder).rglob("*")):
        if path.is_symlink():
            out[str(path)] = ("link", os.readlink(path))
        elif path.is_file():
            out[str(path)] = ("file", path.read_bytes())
        else:
            out[str(path)] = ("dir", None)
    return out


@pytest.fixture
def project(tmp_path):
    """A user's folder: a catalogue, a setup file, a configuration and notes of their own."""
    folder = tmp_path / "project"
    folder.mkdir()
    (folder / "cat.csv").write_bytes(CATALOGUE.read_bytes())
    SearchSetup(t_seg=10 * u.day, n_seg=4, band=(100 * u.Hz, 120 * u.Hz)).to_toml(
        folder / "setup.toml")
    (folder / "notes.txt").write_text("my own notes\n")

    def config(output=None, target="Fict Quill", name="a.toml"):
        line = "" if output is None else f"output = {json.dumps(output)}"
        path = folder / name
        path.write_text(CONFIG.format(output=line, target=target))
        return path
    return folder, config


def refused(argv, capsys, *folders):
    """Run ``argv``; it must exit 2 with ``error:`` and leave ``folders`` exactly as they were."""
    before = [snapshot(f) for f in folders]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "Traceback" not in err
    assert [snapshot(f) for f in folders] == before
    return err


# --- item 1: a report replaces only a folder cwlimits made ---------------------------------

@pytest.mark.parametrize("output", ["user", "..", "", ".", "cat.csv", "link", "a.toml",
                                    "empty-link"])
def test_report_refuses_an_output_it_did_not_make(project, tmp_path, capsys, output,
                                                  monkeypatch):
    folder, config = project
    (folder / "user").mkdir()
    (folder / "user" / "data.txt").write_text("precious\n")
    (tmp_path / "elsewhere").mkdir()
    (tmp_path / "elsewhere" / "thesis.tex").write_text("precious too\n")
    (folder / "link").symlink_to(tmp_path / "elsewhere", target_is_directory=True)
    # a link to an empty folder is refused too: cwlimits never writes through a link
    (tmp_path / "empty").mkdir()
    (folder / "empty-link").symlink_to(tmp_path / "empty", target_is_directory=True)
    path = config(output)
    monkeypatch.chdir(tmp_path)
    err = refused(["report", str(path)], capsys, tmp_path)
    assert "output" in err
    assert not list(tmp_path.rglob(".*cwlimits-stage*"))  # no staging folder left


def test_demo_refuses_a_link_and_a_user_folder(tmp_path, capsys):
    (tmp_path / "target").mkdir()
    (tmp_path / "link").symlink_to(tmp_path / "target", target_is_directory=True)
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "data.txt").write_text("precious\n")
    for out in ("link", "mine"):
        err = refused(["demo", "--out-dir", str(tmp_path / out)], capsys, tmp_path)
        assert "--out-dir" in err


@pytest.mark.parametrize("output", ["..", "", "user"])
def test_overwrite_adds_the_report_and_deletes_no_file_of_the_user(project, tmp_path,
                                                                   capsys, output):
    folder, config = project
    (folder / "user").mkdir()
    (folder / "user" / "data.txt").write_text("precious\n")
    user_files = {p: p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    out = (folder / output).resolve()
    # a file in the way whose name the report uses is never replaced, even with --overwrite
    (out / "index.html").write_text("<p>my page</p>")
    err = refused(["-q", "report", str(config(output)), "--overwrite"], capsys, tmp_path)
    assert "index.html" in err
    (out / "index.html").unlink()
    assert main(["-q", "report", str(config(output)), "--overwrite"]) == 0
    for path, data in user_files.items():
        assert path.read_bytes() == data, path  # every user file kept, unchanged
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    assert "index.html" in manifest["files"] and "notes.txt" not in manifest["files"]


def test_rerun_replaces_its_own_report_and_refuses_one_with_user_files(project, capsys):
    folder, config = project
    out = folder / "rep"
    assert main(["-q", "report", str(config("rep"))]) == 0
    first = set(json.loads((out / MANIFEST_NAME).read_text())["files"])
    assert "plan_fict_quill.toml" in first and first == {
        p.name for p in out.iterdir()} - {MANIFEST_NAME}
    # the user adds a file to the report folder: a plain rerun must not delete it
    (out / "my_comments.txt").write_text("keep me\n")
    err = refused(["report", str(config("rep"))], capsys, folder)
    assert "my_comments.txt" in err and "--overwrite" in err
    # --overwrite with another target: the old report's files (listed in its manifest)
    # go, the user's file stays
    other = "Fict Ember"
    assert main(["-q", "report", str(config("rep", target=other)), "--overwrite"]) == 0
    assert (out / "my_comments.txt").read_text() == "keep me\n"
    assert not (out / "plan_fict_quill.toml").exists()
    assert (out / "plan_fict_ember.toml").is_file()
    # a report folder whose file the user edited counts as theirs
    (out / "index.html").write_text("edited by hand")
    (out / "my_comments.txt").unlink()
    err = refused(["report", str(config("rep", target=other))], capsys, folder)
    assert "index.html" in err


def test_a_tampered_manifest_never_deletes_outside_the_folder(tmp_path):
    from cwlimits.report.html import Report, file_sha256

    victim = tmp_path / "victim.txt"
    victim.write_text("outside the report\n")
    out = tmp_path / "rep"
    with Report("x", out) as rep:
        rep.section("a", "b")
        rep.write({})
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    manifest["files"]["../victim.txt"] = file_sha256(victim)
    (out / MANIFEST_NAME).write_text(json.dumps(manifest))
    with Report("x", out) as rep:
        rep.section("a", "c")
        rep.write({})
    assert victim.read_text() == "outside the report\n"
    assert "c" in (out / "index.html").read_text()


# --- item 3: stale staging folders of ours, and only those ---------------------------------

@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_a_killed_report_leaves_a_stage_that_the_next_run_removes(project, capsys):
    folder, config = project
    out = folder / "rep"
    # a real process that dies (SIGKILL) in the middle of writing a report
    code = ("import os, signal, sys; from cwlimits.report import Report; "
            "rep = Report('killed', sys.argv[1]); rep.section('a', 'b'); "
            "os.kill(os.getpid(), signal.SIGKILL)")
    job = subprocess.run([sys.executable, "-c", code, str(out)], capture_output=True,
                         env=dict(os.environ, PYTHONPATH=str(ROOT)), timeout=120)
    assert job.returncode == -signal.SIGKILL
    (stale,) = folder.glob(".rep.cwlimits-stage-*")
    # hidden folders that are not provably ours stay: no marker, or a live process's
    unmarked = folder / ".rep.cwlimits-stage-unmarked"
    unmarked.mkdir()
    (unmarked / "user.txt").write_text("not cwlimits'\n")
    live = folder / ".rep.cwlimits-stage-live"
    live.mkdir()
    (live / ".cwlimits-staging.json").write_text(json.dumps({
        "kind": "cwlimits staging", "pid": os.getppid(), "host": os.uname().nodename,
        "created_at": "2026-01-01T00:00:00+00:00"}))
    assert main(["-q", "report", str(config("rep"))]) == 0
    assert not stale.exists()
    assert (unmarked / "user.txt").is_file() and live.is_dir()
    assert (out / "index.html").is_file()


# --- item 2: store --clear deletes only a verifiable store ---------------------------------

def _real_store(folder):
    with open_store(folder) as store:
        run = store.begin_run({"command": "fictional"})
        store.begin_part(run, "", n_items=1, chunk_size=1, seed=np.random.SeedSequence(1))
        store.save_chunk(run, "", 0, 0, 1, {"x": np.zeros(1)})
    return folder / STORE_NAME


def _other_sqlite(path):
    with sqlite3.connect(path) as db:
        db.execute("CREATE TABLE runs (id INTEGER, note TEXT)")
        db.execute("INSERT INTO runs VALUES (1, 'a user database')")
    db.close()


@pytest.mark.parametrize("kind", ["text", "other-sqlite", "empty", "link-to-store"])
def test_store_clear_refuses_what_is_not_a_store(tmp_path, capsys, kind):
    folder = tmp_path / "out"
    folder.mkdir()
    path = folder / STORE_NAME
    if kind == "text":
        path.write_text("name,value\nfictional,1\n")
    elif kind == "other-sqlite":
        _other_sqlite(path)
    elif kind == "empty":
        path.write_bytes(b"")
    else:
        real = _real_store(tmp_path / "real")
        path.symlink_to(real)
    assert not is_store(path)
    err = refused(["store", str(folder), "--clear"], capsys, tmp_path)
    assert "not a cwlimits results store" in err
    refused(["store", str(folder)], capsys, tmp_path)  # listing refuses and changes nothing


def test_store_clear_deletes_a_real_store_and_its_side_files(tmp_path, capsys):
    path = _real_store(tmp_path)
    # the SQLite header of a store (SQLite file format, section 1.3: "SQLite format 3\0")
    assert path.read_bytes()[:16] == b"SQLite format 3\x00" and is_store(path)
    (tmp_path / "keep.csv").write_text("a\n1\n")
    assert main(["store", str(tmp_path), "--clear"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.csv"]


# --- item 4: unwritable outputs are refused before any work --------------------------------

def _boom(*args, **kwargs):
    raise AssertionError("work started before the output path was checked")


def _output_cases(tmp_path):
    """(option value) for: a file in the way, an uncreatable folder, a read-only folder."""
    blocker = tmp_path / "a_file"
    blocker.write_text("in the way\n")
    readonly = tmp_path / "readonly"
    readonly.mkdir()
    readonly.chmod(0o555)
    cases = {"file-in-the-way": blocker / "sub", "missing-parent": UNWRITABLE / "nope" / "sub"}
    if not IS_ROOT:  # a superuser writes into read-only folders
        cases["read-only"] = readonly / "sub"
    return cases


COMMANDS = [
    # (argv before the output option, option, file name, module, function that does work;
    # the commands import the library functions when they run: patched where they live)
    (["indirect", str(CATALOGUE)], "--out", "x.csv", "cwlimits.targets.indirect",
     "indirect_limits"),
    (["noise", "second-gen-fit", "--band", "20Hz", "30Hz", "--band-width", "1Hz"], "--plot",
     "asd.png", "cwlimits.noise", "band_psd"),
    (["noise", "second-gen-fit", "--band", "20Hz", "30Hz", "--band-width", "1Hz"], "--out",
     "n.csv", "cwlimits.noise", "band_psd"),
    (["plan", "--catalogue", str(CATALOGUE), "--target", "Fict Quill", "--budget", "10 h",
      "--span", "30 day"], "--out", "plan.toml", "cwlimits.planning.optimise", "plan_search"),
    (["rank", str(CATALOGUE), "--budget", "10 h", "--span", "30 day"], "--plans-dir",
     "plans", "cwlimits.planning.optimise", "rank_targets"),
    (["rank", str(CATALOGUE), "--budget", "10 h", "--span", "30 day"], "--out",
     "rank.csv", "cwlimits.planning.optimise", "rank_targets"),
    (["convert", "--h0", "1e-25", "--f-gw", "100Hz", "--distance", "1kpc"], "--out",
     "c.csv", "cwlimits.targets.conversions", "ellipticity"),
    (["response", "--ra", "1h", "--dec", "10d", "--start", "2030-01-01"], "--plot",
     "r.png", "cwlimits.response.antenna", "time_averages"),
]


@pytest.mark.parametrize("argv, option, name, module, function", COMMANDS,
                         ids=[f"{c[0][0]}{c[1]}" for c in COMMANDS])
def test_unwritable_outputs_exit_2_before_any_work(tmp_path, capsys, monkeypatch, argv,
                                                   option, name, module, function):
    import importlib

    monkeypatch.setattr(importlib.import_module(module), function, _boom, raising=True)
    for case, folder in _output_cases(tmp_path).items():
        err = refused([*argv, option, str(folder / name)], capsys, tmp_path)
        assert option in err and ("cannot" in err), case


def test_report_with_an_unwritable_output_exits_2_before_any_work(project, tmp_path, capsys,
                                                                  monkeypatch):
    import cwlimits.report.chain

    folder, config = project
    monkeypatch.setattr(cwlimits.report.chain, "indirect_limits", _boom)
    for case, out in _output_cases(tmp_path).items():
        err = refused(["report", str(config(str(out)))], capsys, folder)
        assert "output" in err and "cannot" in err, case


# --- item 5: no results store after refused input ------------------------------------------

LIMITS_BAD = [
    ["--prior", "log-uniform"],                       # no lower cut-off
    ["--h0-min", "1e-24", "--h0-max", "1e-25"],       # cut-offs the wrong way round
    ["--h0-max", "-1"],                               # negative cut-off
    ["--moment-of-inertia-range", "2e38", "1e38"],              # range the wrong way round
    ["--method", "frequentist", "--sampler", "emcee", "--bands", "0"],
    ["--sampler", "emcee", "--bands", "0", "--sky", "isotropic"],
    ["--sampler", "emcee", "--bands", "99"],           # no such band
    ["--confidence", "1"],
    ["--walkers", "4"],
    ["--draws", "0"],
    ["--noise", "no-such-model"],
]


@pytest.fixture
def limits_files(tmp_path):
    setup = tmp_path / "s.toml"
    SearchSetup(t_seg=10 * u.day, n_seg=4, band=(100 * u.Hz, 110 * u.Hz)).to_toml(setup)
    results = tmp_path / "res.csv"
    lines = ["f_lo [Hz],band_width [Hz],loudest_2F"]
    lines += [f"{100 + 0.5 * i},0.5,{30 + i}" for i in range(10)]
    results.write_text("\n".join(lines) + "\n")
    return setup, results


@pytest.mark.parametrize("extra", LIMITS_BAD, ids=[" ".join(e) for e in LIMITS_BAD])
def test_refused_limits_leave_no_store_behind(tmp_path, capsys, limits_files, extra):
    setup, results = limits_files
    out = tmp_path / "o" / "ul.csv"
    refused(["limits", str(results), "--setup", str(setup), "--catalogue", str(CATALOGUE),
             "--target", "Fict Quill", "--out", str(out), *extra], capsys, tmp_path)
    assert not (tmp_path / "o").exists()


# --- item 6: two processes on one store share the chunks -----------------------------------

def test_two_processes_on_one_store_compute_each_chunk_once(tmp_path):
    from _chunk_jobs import toy_draws

    from cwlimits.runtime.executor import map_chunks

    store_path = tmp_path / "s.sqlite"
    jobs = [subprocess.Popen([sys.executable, str(HERE / "_store_job.py"), str(store_path),
                              str(tmp_path / f"out{k}.npz"), "7", "1200", "100", "0.4"],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                             env=dict(os.environ, PYTHONPATH=str(ROOT)))
            for k in range(2)]
    for job in jobs:
        _, err = job.communicate(timeout=300)
        assert job.returncode == 0, err.decode()
    reference = map_chunks(toy_draws, {"x": np.linspace(0.0, 50.0, 1200)}, chunk_size=100,
                           rng=7)
    for k in range(2):
        with np.load(tmp_path / f"out{k}.npz", allow_pickle=False) as result:
            for name, array in reference.items():
                assert result[name].tobytes() == array.tobytes(), (k, name)
    with ResultStore(store_path) as store:
        log = store.chunk_log()
        assert store.live_claims() == []
    # each of the 12 chunks was saved exactly once, whichever process computed it
    assert sorted(r["chunk"] for r in log) == list(range(12))


def test_a_claim_of_a_dead_process_is_taken_over(tmp_path):
    from _chunk_jobs import toy_draws

    from cwlimits.runtime.executor import map_chunks

    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "claims"})
        seed = store.begin_part(run, "", n_items=30, chunk_size=10,
                                seed=np.random.SeedSequence(5))
        store._db.execute("INSERT INTO sessions (pid, host, started_at, cwlimits_version) "
                          "VALUES (?, ?, ?, ?)", (dead.pid, os.uname().nodename,
                                                  "2026-01-01T00:00:00+00:00", "0"))
        store._db.execute("INSERT INTO claims VALUES (?, '', 1, last_insert_rowid(), ?, ?, ?)",
                          (run, dead.pid, os.uname().nodename, "2026-01-01T00:00:00+00:00"))
        out = map_chunks(toy_draws, {"x": np.arange(30.0)}, chunk_size=10, rng=seed,
                         store=store, key=run)
        assert store.finished_chunks(run) == {0, 1, 2}
    expected = map_chunks(toy_draws, {"x": np.arange(30.0)}, chunk_size=10, rng=5)
    assert out["y"].tobytes() == expected["y"].tobytes()


# --- item 17: one writer, modes from the umask --------------------------------------------

@pytest.mark.parametrize("umask, file_mode, dir_mode", [(0o022, 0o644, 0o755),
                                                        (0o077, 0o600, 0o700)])
def test_written_files_take_their_mode_from_the_umask(project, tmp_path, umask, file_mode,
                                                      dir_mode):
    folder, config = project
    old = os.umask(umask)
    try:
        assert main(["-q", "indirect", str(CATALOGUE), "--out",
                     str(tmp_path / "t" / "x.ecsv")]) == 0
        assert main(["-q", "noise", "second-gen-fit", "--band", "20Hz", "30Hz", "--band-width",
                     "1Hz", "--plot", str(tmp_path / "t" / "asd.svg")]) == 0
        if umask == 0o022:  # the report (the slow part) once: figures for a web server
            assert main(["-q", "report", str(config("rep"))]) == 0
    finally:
        os.umask(old)
    written = [tmp_path / "t" / "x.ecsv", tmp_path / "t" / "asd.svg"]
    folders = [tmp_path / "t"]
    if umask == 0o022:
        written += sorted((folder / "rep").iterdir())
        folders.append(folder / "rep")
        assert len(written) > 10
    for path in written:
        assert path.stat().st_mode & 0o777 == file_mode, path
    for path in folders:
        assert path.stat().st_mode & 0o777 == dir_mode, path
    # no temporary file of the writer is left anywhere
    assert not list(tmp_path.rglob("*.cwlimits-tmp"))


def test_one_writer_for_every_file(tmp_path):
    # every write in the package goes through cwlimits._files.atomic_write: no other
    # module creates temporary files or writes text or bytes to a path by itself
    import re

    pattern = re.compile(r"mkstemp|mkdtemp|NamedTemporaryFile|TemporaryDirectory|"
                         r"\.write_text\(|"
                         r"\.write_bytes\(|savefig\(\s*(tmp|path)\b")
    offenders = []
    for path in sorted((ROOT / "cwlimits").rglob("*.py")):
        if path.name == "_files.py":
            continue
        for number, line in enumerate(path.read_text().splitlines(), start=1):
            if pattern.search(line):
                offenders.append(f"{path.relative_to(ROOT)}:{number}: {line.strip()}")
    assert offenders == []


def test_claims_of_one_process(tmp_path):
    # a single process never waits: with no other claimer every chunk is "mine"
    with ResultStore(tmp_path / "s.sqlite") as store:
        run = store.begin_run({"job": "alone"})
        store.begin_part(run, "", n_items=2, chunk_size=1, seed=np.random.SeedSequence(1))
        assert [store.claim_chunk(run, "", i) for i in (0, 1)] == ["mine", "mine"]
        store.save_chunk(run, "", 0, 0, 1, {"x": np.zeros(1)})
        assert store.claim_chunk(run, "", 0) == "done"


# A single output file (--out, --plot, --table, ...) replaces only a file cwlimits wrote:
# the brief's rule "never overwrite a file it did not write" (common practice for tools
# that write into a user's folders).
@pytest.mark.parametrize("argv", [
    ["indirect", str(CATALOGUE), "--out", "{dir}/cat.csv"],
    ["indirect", str(CATALOGUE), "--out", "{dir}/cat.ecsv"],
    ["noise", "--plot", "{dir}/curve.png"],
    ["noise", "--plot", "{dir}/curve.pdf"],
    ["noise", "--plot", "{dir}/curve.svg"],
])
def test_an_output_file_replaces_only_a_file_cwlimits_wrote(tmp_path, capsys, argv):
    target = pathlib.Path(argv[-1].format(dir=tmp_path))
    argv = [a.format(dir=tmp_path) for a in argv]
    target.write_text("name,ra,dec\nmy own data\n")
    before = snapshot(tmp_path)
    assert main(argv) == 2
    assert "was not written by cwlimits" in capsys.readouterr().err
    assert snapshot(tmp_path) == before
    # once cwlimits wrote it, a rerun replaces it
    target.unlink()
    assert main(argv) == 0
    first = target.stat().st_mtime_ns
    assert main(argv) == 0
    assert target.exists() and target.stat().st_mtime_ns >= first
    capsys.readouterr()


def test_plans_dir_never_replaces_a_user_file_named_like_a_plan(tmp_path, capsys):
    # The plan file of each catalogue target (slug of its name) is checked before any work.
    plans = tmp_path / "plans"
    plans.mkdir()
    (plans / "Fict_Quill.toml").write_text("# my notes\n")
    before = snapshot(tmp_path)
    assert main(["rank", str(CATALOGUE), "--budget", "1e4 h", "--span", "100 d",
                 "--plans-dir", str(plans)]) == 2
    assert "was not written by cwlimits" in capsys.readouterr().err
    assert snapshot(tmp_path) == before
