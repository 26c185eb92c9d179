"""Files partpick writes: a spec cannot write outside the output folder, a refusal writes
nothing, writes are atomic and leave no temporary file, and every file-system failure is
one line naming the path and the cause, exit 2 (issue "files").

Read-only places are made with ``chattr +i`` when running as root (root ignores mode
bits, not the immutable flag), else with mode 0555; unreadable files are read by a
forked process that has dropped to the user ``nobody`` when running as root, else
with mode 0000."""

from __future__ import annotations

import json
import os
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from click.testing import CliRunner

from partpick import fileio
from partpick.cli import main
from partpick.errors import InputError
from tests.conftest import CATALOGS, ROOT, SPECS

SPEC = SPECS / "seismic-cal-20hz.yaml"


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def one_line_error(result, *words):
    assert result.exit_code == 2, (result.output, result.stderr)
    err = result.stderr.strip()
    assert err.startswith("error: ") and "\n" not in err and "Traceback" not in err, err
    for word in words:
        assert word in err, err
    return err


def listing(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): (p.read_bytes() if p.is_file() else b"")
            for p in sorted(folder.rglob("*"))}


@pytest.fixture(scope="module")
def cached_design(demo_catalog):
    """One real design of the seismic spec (-n 2), reused by the CLI runs below so they
    test naming and writing, not the search."""
    from partpick.pipeline import design
    from partpick.spec import Spec

    return design(Spec.from_yaml(SPEC), demo_catalog, results=2, samples=500)


@pytest.fixture()
def no_search(monkeypatch, cached_design):
    import partpick.pipeline

    calls = []

    def fake(*args, **kwargs):
        calls.append(1)
        return cached_design
    monkeypatch.setattr(partpick.pipeline, "design", fake)
    return calls


def _spec_named(tmp_path: Path, name: str) -> Path:
    text = SPEC.read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if not ln.startswith("name:")]
    path = tmp_path / "in" / "spec.yaml"
    path.parent.mkdir(exist_ok=True)
    path.write_text(f"name: {json.dumps(name)}\n" + "\n".join(lines) + "\n", encoding="utf-8")
    return path


# -- names from the spec ---------------------------------------------------------------------

@pytest.mark.parametrize("name,stem", [
    ("../outside/escaped", "outside-escaped"),
    ("/etc/passwd", "etc-passwd"),
    (".hidden", "hidden"),
    ("..", "spec"),                  # nothing left: the spec file's own stem
    ("a/b\\c:d", "a-b-c-d"),
    ("x" * 300, "x" * 64),
    ("CON", "CON-spec"),
    ("Prüfstand 5 kHz", "Prüfstand-5-kHz"),
])
def test_safe_stem(name, stem):
    assert fileio.safe_stem(name, "specs/spec.yaml") == stem


@pytest.mark.parametrize("name", ["../outside/escaped", "/tmp/abs", ".hidden", "x" * 300, "a/../../b"])
def test_a_spec_name_never_places_a_file_outside_out(tmp_path, no_search, name):
    spec = _spec_named(tmp_path, name)
    out = tmp_path / "work" / "out"
    before = listing(tmp_path)
    result = run("design", spec, "--out", out, "--plots", out, "--catalog", CATALOGS, "-n", "2", "--samples", "500")
    assert result.exit_code == 0, result.output + result.stderr
    new = sorted(set(listing(tmp_path)) - set(before))
    assert new and all(p == "work" or p == "work/out" or p.startswith("work/out/") for p in new), new
    assert all(Path(p).name[0] not in ".-" for p in new), new
    assert len(list(out.iterdir())) == 2 * 3 + 1


def test_a_nul_in_the_spec_name_is_refused_before_anything(tmp_path, no_search):
    spec = tmp_path / "spec.yaml"
    spec.write_text(SPEC.read_text(encoding="utf-8").replace("name: seismic-cal-20hz", 'name: "a\\0b"'),
                    encoding="utf-8")
    out = tmp_path / "out"
    err = one_line_error(run("design", spec, "--out", out, "--catalog", CATALOGS), f"{spec}:", "'name'",
                         "printable", "a\\x00b")
    assert err.startswith(f"error: {spec}:")
    assert not out.exists() and not no_search


# -- a refusal writes nothing --------------------------------------------------------------------

def test_a_clash_on_rank_2_leaves_the_folder_exactly_as_it_was(tmp_path, no_search):
    out = tmp_path / "out"
    out.mkdir()
    (out / "seismic-cal-20hz-02.csv").write_text("mine\n", encoding="utf-8")
    before = listing(out)
    err = one_line_error(run("design", SPEC, "--out", out, "--catalog", CATALOGS, "-n", "2"),
                         "seismic-cal-20hz-02.csv", "already exists", "--force")
    assert listing(out) == before
    assert not no_search, "the clash must be found before the search runs"
    assert err == f"error: {out / 'seismic-cal-20hz-02.csv'}: already exists; pass --force to overwrite it"


def test_force_overwrites_and_files_get_the_umask(tmp_path, no_search):
    out = tmp_path / "out"
    out.mkdir()
    (out / "seismic-cal-20hz-02.csv").write_text("mine\n", encoding="utf-8")
    old = os.umask(0o027)
    try:
        result = run("design", SPEC, "--out", out, "--catalog", CATALOGS, "-n", "2", "--force")
    finally:
        os.umask(old)
    assert result.exit_code == 0, result.stderr
    assert (out / "seismic-cal-20hz-02.csv").read_text(encoding="utf-8") != "mine\n"
    modes = {stat.S_IMODE(p.stat().st_mode) for p in out.iterdir()}
    assert modes == {0o640}, modes  # 0666 less the umask, as open() gives; mkstemp alone gives 0600


def test_the_same_file_named_twice_is_refused(tmp_path, no_search):
    out = tmp_path / "out"
    report = out / "seismic-cal-20hz-01.yaml"
    one_line_error(run("design", SPEC, "--out", out, "--report", report, "--catalog", CATALOGS, "-n", "2"),
                   "written twice", "--report", "--out")
    assert not out.exists()


def test_a_failed_write_removes_the_files_the_command_wrote(tmp_path, no_search, monkeypatch):
    out = tmp_path / "out"
    real = fileio.write_atomic
    count = [0]

    def flaky(path, data, *, force=False):
        count[0] += 1
        if count[0] == 4:  # rank 2's first file
            raise InputError("cannot write file (No space left on device)", source=str(path))
        return real(path, data, force=force)
    monkeypatch.setattr("partpick.fileio.write_atomic", flaky)
    one_line_error(run("design", SPEC, "--out", out, "--catalog", CATALOGS, "-n", "2"), "No space left")
    assert list(out.iterdir()) == []


# -- temporaries ------------------------------------------------------------------------------------

def test_write_atomic_leaves_no_temporary_on_ctrl_c(tmp_path, monkeypatch):
    def interrupted(*args):
        raise KeyboardInterrupt
    monkeypatch.setattr(os, "link", interrupted)
    with pytest.raises(KeyboardInterrupt):
        fileio.write_atomic(tmp_path / "a.txt", "text")
    assert list(tmp_path.iterdir()) == []


def test_sigterm_during_a_write_leaves_no_temporary(tmp_path):
    code = f"""
import os, signal, time
from partpick import fileio
fileio.exit_on_signals()
def slow_link(src, dst):
    os.kill(os.getpid(), signal.SIGTERM)
    time.sleep(5)
os.link = slow_link
fileio.write_atomic({str(tmp_path / 'a.txt')!r}, "text")
"""
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=60)
    assert proc.returncode == 128 + signal.SIGTERM, proc.stderr
    assert list(tmp_path.iterdir()) == []


# -- file-system failures: one line naming the path and the cause ---------------------------------------

def _read_only(folder: Path):
    """Make ``folder`` read-only for this process; None when this machine cannot."""
    if os.geteuid() == 0:
        if shutil.which("chattr") is None or subprocess.run(["chattr", "+i", str(folder)],
                                                             capture_output=True).returncode:
            return None
        return lambda: subprocess.run(["chattr", "-i", str(folder)], check=True)
    folder.chmod(0o555)
    return lambda: folder.chmod(0o755)


@pytest.mark.parametrize("option", ["--plots", "--report", "--out"])
def test_outputs_into_a_read_only_folder(tmp_path, no_search, option):
    ro = tmp_path / "ro"
    ro.mkdir()
    undo = _read_only(ro)
    if undo is None:
        pytest.skip("cannot make a read-only folder here (root without chattr)")
    try:
        target = ro / "page.html" if option == "--report" else ro
        err = one_line_error(run("design", SPEC, option, target, "--catalog", CATALOGS, "-n", "2"),
                             str(ro), "cannot write in folder")
        assert "Operation not permitted" in err or "Permission denied" in err or "Read-only" in err, err
    finally:
        undo()
    assert list(ro.iterdir()) == [] and not no_search


@pytest.mark.parametrize("args,words", [
    (["design", SPEC, "--plots", "{file}", "-n", "2"], ["{file}", "is a file"]),
    (["design", SPEC, "--plots", "{file}/sub", "-n", "2"], ["part of the path is a file"]),
    (["design", SPEC, "--out", "{dir}/" + "n" * 300, "-n", "2"], ["longer than the 255 bytes"]),
    (["init", "{dir}/" + "n" * 300 + ".yaml"], ["longer than the 255 bytes"]),
    (["init", "{file}/spec.yaml"], ["part of the path is a file"]),
    (["init", "{dir}"], ["is a directory"]),
    (["netlist", SPECS / "boms" / "carrier-50khz-01.yaml", "--spec", SPECS / "carrier-50khz.yaml", "-o", "{fifo}"],
     ["FIFO", "regular files only"]),
])
def test_file_system_failures_on_writing(tmp_path, no_search, args, words):
    afile = tmp_path / "afile"
    afile.write_text("x\n", encoding="utf-8")
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    fill = {"{file}": str(afile), "{dir}": str(tmp_path), "{fifo}": str(fifo)}

    def sub(a):
        a = str(a)
        for k, v in fill.items():
            a = a.replace(k, v)
        return a
    before = listing(tmp_path)
    extra = ["--catalog", CATALOGS] if args[0] != "init" else []
    one_line_error(run(*[sub(a) for a in args], *extra), *[sub(w) for w in words])
    assert listing(tmp_path) == before


def _nobody_reads(args: list[str]):
    """Run the CLI in a forked child that has dropped to 'nobody'; (exit code, stderr)."""
    import pwd

    entry = pwd.getpwnam("nobody")
    CliRunner().invoke(main, args)  # warm the imports the child will need
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # pragma: no cover - the child
        try:
            os.close(r)
            os.setgroups([])
            os.setgid(entry.pw_gid)
            os.setuid(entry.pw_uid)
            res = CliRunner().invoke(main, args)
            os.write(w, json.dumps([res.exit_code, res.stderr]).encode())
        finally:
            os._exit(0)
    os.close(w)
    with os.fdopen(r) as fh:
        data = fh.read()
    os.waitpid(pid, 0)
    return json.loads(data)


@pytest.fixture()
def shared_dir():
    """A folder 'nobody' can reach (pytest's tmp_path is private to root)."""
    folder = Path(tempfile.mkdtemp(prefix="partpick-test-"))
    folder.chmod(0o755)
    yield folder
    for p in [folder, *folder.rglob("*")]:
        if p.is_dir():
            p.chmod(0o755)
    shutil.rmtree(folder)


def _unreadable_run(args, path: Path):
    path.chmod(0)
    if os.geteuid() == 0:
        try:
            import pwd

            pwd.getpwnam("nobody")
        except KeyError:
            pytest.skip("no user 'nobody' to drop to")
        return _nobody_reads([str(a) for a in args])
    res = CliRunner().invoke(main, [str(a) for a in args])
    return res.exit_code, res.stderr


def test_an_unreadable_spec_is_one_line(shared_dir):
    spec = shared_dir / "spec.yaml"
    shutil.copy(SPEC, spec)
    code, err = _unreadable_run(["spec", "check", spec, "--catalog", CATALOGS], spec)
    assert code == 2
    assert err.strip() == f"error: {spec}: cannot read file (Permission denied)"


def test_an_unlistable_catalog_folder_is_one_line(shared_dir):
    cat = shared_dir / "cat"
    shutil.copytree(CATALOGS, cat)
    code, err = _unreadable_run(["catalog", "validate", cat], cat)
    assert code == 2
    assert err.strip() == f"error: {cat}: cannot read catalog folder or file (Permission denied)"


def test_an_unreadable_catalog_file_is_one_line(shared_dir):
    cat = shared_dir / "cat"
    shutil.copytree(CATALOGS, cat)
    code, err = _unreadable_run(["catalog", "validate", cat], cat / "opamps.yaml")
    assert code == 2
    assert err.strip() == f"error: {cat / 'opamps.yaml'}: cannot read file (Permission denied)"


@pytest.mark.parametrize("option,module", [("--plots", "matplotlib"), ("--report", "schemdraw")])
def test_a_missing_extra_is_refused_before_the_search(tmp_path, no_search, monkeypatch, option, module):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == module else real(name, *a))
    target = tmp_path / ("page.html" if option == "--report" else "plots")
    one_line_error(run("design", SPEC, option, target, "--catalog", CATALOGS), option, f"needs {module}",
                   "pip install")
    assert not no_search and not target.exists()
