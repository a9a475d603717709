"""Files in and out: only small regular files are read; writes are atomic, exclusive and signal-safe.

Signals and races run in child processes and are made deterministic by
pausing the child at a chosen system call (a patched ``os`` function) rather
than by timing: the parent waits for the child to say it is there, then sends
the signal.  Every child has a timeout so that a regression fails instead of
hanging; no assertion is about time.
"""

from __future__ import annotations

import json
import os
import signal
import stat
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

import decide
import decide.scenario._writing as writing
from decide.cli import app
from decide.errors import DecideError
from decide.scenario import (
    MAX_FILE_BYTES,
    PolicyFileError,
    ScenarioError,
    check_output_path,
    load_policy_file,
    load_scenario,
    parse_scenario,
    write_text_atomic,
)

REPO = Path(__file__).resolve().parents[1]
SCENARIO = REPO / "scenarios" / "solvent-cohort.toml"
PACKAGE_PARENT = str(Path(decide.__file__).resolve().parents[1])
AS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0
TIMEOUT = 300  # seconds before a hung child counts as a failure (not a timing check)


def child_env() -> dict[str, str]:
    """A child Python imports the same ``decide`` as these tests; one BLAS thread."""
    env = dict(os.environ, COLUMNS="100", OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    env["PYTHONPATH"] = os.pathsep.join([PACKAGE_PARENT, *filter(None, [env.get("PYTHONPATH")])])
    return env


def run(*args: str | Path) -> Any:
    return CliRunner().invoke(app, [str(a) for a in args], env={"COLUMNS": "100"})


def one_line(result: Any, status: int = 2) -> str:
    assert result.exit_code == status, result.stdout + result.stderr
    assert result.stdout == ""
    err: str = result.stderr
    assert err.endswith("\n") and err.count("\n") == 1 and "Traceback" not in err, err
    return err


def files_in(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


# --- reading: regular files only, and small -----------------------------------


def _cli_child(args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    code = "import sys; from decide.cli import main; sys.argv[0] = 'decide'; main()"
    return subprocess.run(
        [sys.executable, "-c", code, *args],
        cwd=cwd,
        env=child_env(),
        capture_output=True,
        text=True,
        timeout=TIMEOUT,
        stdin=subprocess.DEVNULL,
    )


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes are POSIX")
def test_a_named_pipe_or_a_device_is_refused_without_reading(tmp_path: Path) -> None:
    # A pipe with no writer would block a plain open(); /dev/zero would never end.
    # The pipe runs in a child, so that a regression fails by timeout instead of hanging the suite;
    # /dev/zero in-process is bounded by the size cap even if the type check were lost.
    pipe = tmp_path / "pipe.toml"
    os.mkfifo(pipe)
    child = _cli_child(["optimize", str(pipe)], tmp_path)
    assert child.returncode == 2 and child.stdout == ""
    assert child.stderr == f"decide optimize: {pipe}: is a named pipe, not a regular file; give the path of a file\n"
    zero = Path("/dev/zero")
    if zero.exists():
        assert one_line(run("optimize", zero)) == (
            f"decide optimize: {zero}: is a character device, not a regular file; give the path of a file\n"
        )


def test_file_size_is_capped_at_the_stated_limit(tmp_path: Path) -> None:
    text = SCENARIO.read_text(encoding="utf-8")
    padding = MAX_FILE_BYTES - len(text.encode("utf-8"))
    at_limit = tmp_path / "at-limit.toml"
    at_limit.write_text(text + "#" * (padding - 1) + "\n", encoding="utf-8")
    assert at_limit.stat().st_size == MAX_FILE_BYTES
    assert load_scenario(at_limit).problem == load_scenario(SCENARIO).problem
    over = tmp_path / "over.toml"
    over.write_text(text + "#" * padding + "\n", encoding="utf-8")
    message = f"{over}: is larger than 1,000,000 bytes, the most read from a scenario or policy file"
    with pytest.raises(ScenarioError) as info:
        load_scenario(over)
    assert str(info.value) == message
    assert one_line(run("optimize", over)) == f"decide optimize: {message}\n"


def test_a_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    # Some editors start UTF-8 files with U+FEFF; TOML itself does not allow it.
    marked = tmp_path / "marked.toml"
    marked.write_bytes(b"\xef\xbb\xbf" + SCENARIO.read_bytes())
    assert load_scenario(marked).problem == load_scenario(SCENARIO).problem
    assert parse_scenario("\ufeff" + SCENARIO.read_text(encoding="utf-8")).problem == load_scenario(SCENARIO).problem
    policy = tmp_path / "marked-policy.toml"
    policy.write_bytes(b"\xef\xbb\xbf" + (REPO / "policies" / "equal-errors.toml").read_bytes())
    assert load_policy_file(policy).alpha_rule == "equal-to-beta"
    assert run("optimize", marked, "--json").exit_code == 0


def test_a_deeply_nested_file_is_one_line(tmp_path: Path) -> None:
    deep = tmp_path / "deep.toml"
    deep.write_text("title = " + "[" * 50_000 + "]" * 50_000 + "\n", encoding="utf-8")
    assert one_line(run("optimize", deep)) == (
        f"decide optimize: {deep}: not valid TOML here: arrays or tables are nested too deeply to read\n"
    )
    with pytest.raises(PolicyFileError, match="too deeply"):
        load_policy_file(deep.rename(tmp_path / "deep-policy.toml"))


# --- output paths checked before any computation -------------------------------


def _bad_outputs(tmp_path: Path) -> dict[str, tuple[Path, str]]:
    (tmp_path / "a-file").write_text("x", encoding="utf-8")
    (tmp_path / "a-folder").mkdir()
    long_name = tmp_path / ("n" * 256)
    return {
        "missing folder": (tmp_path / "absent" / "out.json", f"the folder {tmp_path / 'absent'} does not exist"),
        "a folder": (tmp_path / "a-folder", "it is a folder"),
        "a file as its folder": (tmp_path / "a-file" / "out.json", "is a file, not a folder"),
        "name over 255 bytes": (long_name, "its name is 256 bytes long, over the limit of 255"),
    }


@pytest.mark.parametrize("case", ["missing folder", "a folder", "a file as its folder", "name over 255 bytes"])
def test_unusable_output_is_refused_before_computing(
    case: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    target, reason = _bad_outputs(tmp_path)[case]

    def computed(*args: object, **kwargs: object) -> None:
        raise AssertionError("computed before checking --output")

    monkeypatch.setattr("decide.cli._compare", computed)
    monkeypatch.setattr("decide.cli.load_scenario", computed)
    result = run("compare", SCENARIO, "--json", "--output", target, "--force")
    err = one_line(result)
    assert err.startswith(f"decide compare: --output {target}: cannot be written: ") and reason in err
    with pytest.raises(DecideError, match="cannot be written"):
        write_text_atomic(target, "x\n", overwrite=True)
    assert files_in(tmp_path) == ["a-file", "a-folder"]


@pytest.mark.skipif(AS_ROOT or not hasattr(os, "geteuid"), reason="permissions do not bind root")
def test_a_folder_without_write_permission_is_refused(tmp_path: Path) -> None:
    folder = tmp_path / "locked"
    folder.mkdir(mode=0o555)
    try:
        err = one_line(run("compare", SCENARIO, "--json", "--output", folder / "out.json"))
        assert f"no permission to create files in {folder}" in err
    finally:
        folder.chmod(0o755)


def test_existing_output_without_force_is_refused_before_computing(tmp_path: Path) -> None:
    target = tmp_path / "out.json"
    target.write_text("keep", encoding="utf-8")
    err = one_line(run("compare", tmp_path / "no-such-scenario.toml", "--json", "--output", target))
    assert err == f"decide compare: --output {target}: already exists; not overwriting it\n"
    assert check_output_path(target, overwrite=True) == target
    assert target.read_text(encoding="utf-8") == "keep"


def test_a_failing_write_cleans_up_without_failing_again(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The folder goes away between the check and the write: one error, nothing left behind.
    real_open = os.open

    def vanished(path: Any, flags: int, mode: int = 0o777, **kw: Any) -> int:
        if str(path).endswith(".tmp"):
            raise NotADirectoryError(20, "Not a directory", str(path))
        return real_open(path, flags, mode, **kw)

    def unlink(path: Any, **kw: Any) -> None:  # the clean-up meets the same error
        raise NotADirectoryError(20, "Not a directory", str(path))

    monkeypatch.setattr(os, "open", vanished)
    monkeypatch.setattr(os, "unlink", unlink)
    with pytest.raises(DecideError) as info:
        write_text_atomic(tmp_path / "out.txt", "x\n")
    assert str(info.value) == f"{tmp_path / 'out.txt'}: cannot be written: Not a directory"
    assert info.value.__suppress_context__  # shown as one line, with no second error
    assert files_in(tmp_path) == []


def test_a_name_at_the_limit_gets_a_shortened_temporary_name(tmp_path: Path) -> None:
    target = tmp_path / ("n" * 255)
    assert write_text_atomic(target, "x\n") == target
    assert files_in(tmp_path) == [target.name]


# --- exclusive creation, modes, symbolic links --------------------------------


def test_a_file_created_during_the_write_is_not_clobbered(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Someone else creates the file after the check and before the commit: a
    # check-then-replace writer would silently overwrite it.
    target = tmp_path / "out.txt"
    real_fsync = os.fsync

    def intruder(fd: int) -> None:
        if not target.exists():
            target.write_text("theirs\n", encoding="utf-8")
        real_fsync(fd)

    monkeypatch.setattr(os, "fsync", intruder)
    with pytest.raises(DecideError, match="already exists; not overwriting it"):
        write_text_atomic(target, "ours\n")
    assert target.read_text(encoding="utf-8") == "theirs\n"
    assert files_in(tmp_path) == ["out.txt"]


def test_without_hard_links_the_file_is_created_exclusively(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def no_links(*args: Any, **kwargs: Any) -> None:
        raise PermissionError(1, "Operation not permitted")  # what Linux says on such file systems

    monkeypatch.setattr(os, "link", no_links)
    target = write_text_atomic(tmp_path / "out.txt", "ours\n")
    assert target.read_text(encoding="utf-8") == "ours\n"
    assert files_in(tmp_path) == ["out.txt"]
    with pytest.raises(DecideError, match="already exists"):
        write_text_atomic(target, "again\n")


@pytest.mark.parametrize("mode", [0o600, 0o640, 0o755])
def test_overwriting_keeps_the_files_mode(mode: int, tmp_path: Path) -> None:
    target = tmp_path / "out.txt"
    target.write_text("old\n", encoding="utf-8")
    target.chmod(mode)
    write_text_atomic(target, "new\n", overwrite=True)
    assert target.read_text(encoding="utf-8") == "new\n"
    assert stat.S_IMODE(target.stat().st_mode) == mode


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
def test_overwriting_a_link_writes_its_target_and_keeps_the_link(tmp_path: Path) -> None:
    (tmp_path / "real").mkdir()
    real = tmp_path / "real" / "report.md"
    real.write_text("old\n", encoding="utf-8")
    real.chmod(0o640)
    link = tmp_path / "latest.md"
    link.symlink_to(Path("real") / "report.md")
    with pytest.raises(DecideError, match="already exists"):
        write_text_atomic(link, "new\n")
    write_text_atomic(link, "new\n", overwrite=True)
    assert link.is_symlink() and os.readlink(link) == str(Path("real") / "report.md")
    assert real.read_text(encoding="utf-8") == "new\n"
    assert stat.S_IMODE(real.stat().st_mode) == 0o640
    assert files_in(tmp_path) == ["latest.md", "real"] and files_in(tmp_path / "real") == ["report.md"]
    # a dangling link is still a name that is taken
    (tmp_path / "dangling").symlink_to(tmp_path / "nowhere")
    with pytest.raises(DecideError, match="already exists"):
        write_text_atomic(tmp_path / "dangling", "x\n")


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes are POSIX")
def test_overwriting_something_not_a_regular_file_is_refused(tmp_path: Path) -> None:
    os.mkfifo(tmp_path / "pipe")
    with pytest.raises(DecideError, match="cannot be written: it is not a regular file"):
        write_text_atomic(tmp_path / "pipe", "x\n", overwrite=True)
    assert stat.S_ISFIFO(os.lstat(tmp_path / "pipe").st_mode)


# --- signals: Ctrl-C and SIGTERM ----------------------------------------------

# The child behaves as at an interactive terminal (SIGINT raises, SIGTERM
# kills), pauses in the first call of `hook` (os.fsync while writing, the
# optimiser while computing), tells the parent on fd `ready`, and waits on fd
# `go`: the parent sends the signal and then lets it go on.
SIGNAL_CHILD = """
import os, signal, sys
signal.signal(signal.SIGINT, signal.default_int_handler)
signal.signal(signal.SIGTERM, signal.SIG_DFL)
ready, go, hook = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
import decide.cli
owner = os if hook == "fsync" else decide.cli
name = "fsync" if hook == "fsync" else "_compare"
real = getattr(owner, name)
def paused(*args, **kwargs):
    setattr(owner, name, real)
    os.write(ready, b"r")
    os.read(go, 1)
    return real(*args, **kwargs)
setattr(owner, name, paused)
sys.argv = ["decide", *sys.argv[4:]]
decide.cli.main()
"""


def _interrupt_child(sig: int, hook: str, args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    ready_r, ready_w = os.pipe()
    go_r, go_w = os.pipe()
    child = subprocess.Popen(
        [sys.executable, "-c", SIGNAL_CHILD, str(ready_w), str(go_r), hook, *args],
        cwd=cwd,
        env=child_env(),
        pass_fds=(ready_w, go_r),
        stdin=subprocess.DEVNULL,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    os.close(ready_w)
    os.close(go_r)
    try:
        if os.read(ready_r, 1) == b"r":  # empty: the child ended before the hook
            child.send_signal(sig)
            os.write(go_w, b"g")
        out, err = child.communicate(timeout=TIMEOUT)
    finally:
        child.kill() if child.poll() is None else None
        os.close(ready_r)
        os.close(go_w)
    return subprocess.CompletedProcess(child.args, child.returncode, out, err)


@pytest.mark.parametrize(
    ("sig", "force"),
    [(signal.SIGINT, False), (signal.SIGINT, True), (signal.SIGTERM, True)],
    ids=["SIGINT-new-file", "SIGINT-force", "SIGTERM-force"],
)
def test_a_signal_while_writing_aborts_and_leaves_no_temporary_file(sig: int, force: bool, tmp_path: Path) -> None:
    target = tmp_path / "start.toml"
    if force:
        target.write_text("old\n", encoding="utf-8")
    args = ["new", "start.toml", "--example", "solvent-cohort", *(["--force"] if force else [])]
    child = _interrupt_child(sig, "fsync", args, tmp_path)
    assert (child.returncode, child.stdout, child.stderr) == (128 + sig, "", "decide: aborted\n")
    assert files_in(tmp_path) == (["start.toml"] if force else [])
    if force:
        assert target.read_text(encoding="utf-8") == "old\n"


def test_ctrl_c_while_computing_aborts_with_one_line(tmp_path: Path) -> None:
    sig = signal.SIGINT
    args = ["compare", str(SCENARIO), "--json", "--output", "out.json"]
    child = _interrupt_child(sig, "compare", args, tmp_path)
    assert (child.returncode, child.stdout, child.stderr) == (128 + sig, "", "decide: aborted\n")
    assert files_in(tmp_path) == []


def test_held_signals_are_delivered_after_the_write(tmp_path: Path) -> None:
    # In-process: a handler of ours sees the signal once the file is safe.
    seen: list[int] = []
    previous = signal.signal(signal.SIGINT, lambda signum, frame: seen.append(signum))
    try:
        with writing._signals_held() as caught:
            signal.raise_signal(signal.SIGINT)
            assert caught == [signal.SIGINT] and seen == []
        assert seen == [signal.SIGINT]
    finally:
        signal.signal(signal.SIGINT, previous)
    assert signal.getsignal(signal.SIGINT) is previous


def test_a_signal_whose_handler_returns_cancels_the_write(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    target = tmp_path / "out.txt"
    target.write_text("old\n", encoding="utf-8")
    real_fsync = os.fsync

    def interrupted(fd: int) -> None:
        signal.raise_signal(signal.SIGINT)
        real_fsync(fd)

    monkeypatch.setattr(os, "fsync", interrupted)
    previous = signal.signal(signal.SIGINT, lambda signum, frame: None)
    try:
        with pytest.raises(DecideError, match="interrupted by a signal; the old file, if any, is unchanged"):
            write_text_atomic(target, "new\n", overwrite=True)
    finally:
        signal.signal(signal.SIGINT, previous)
    assert target.read_text(encoding="utf-8") == "old\n" and files_in(tmp_path) == ["out.txt"]


# --- SIGKILL and concurrent writers (a forking child) --------------------------

# One child imports decide once and forks: each grandchild kills itself with
# SIGKILL just before its k-th call of an os function the writer uses (k drawn
# with a seeded generator over every step of a write), so kills land between
# any two system calls of the write, including between the chunks of the text.
KILL_CHILD = """
import json, os, random, signal, sys
from decide.scenario import write_text_atomic
from decide.errors import DecideError
folder, kills, seed = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
target = os.path.join(folder, "out.txt")
OLD, NEW = "old\\n" * 100_000, "new\\n" * 100_000
STEPS = ("open", "write", "fsync", "fchmod", "close", "link", "replace", "unlink")
count = [0]

def hook(kill_at):
    for name in STEPS:
        real = getattr(os, name)
        def step(*args, _real=real, **kwargs):
            count[0] += 1
            if count[0] == kill_at:
                os.kill(os.getpid(), signal.SIGKILL)
            return _real(*args, **kwargs)
        setattr(os, name, step)

def in_child(kill_at, overwrite):
    pid = os.fork()
    if pid == 0:
        hook(kill_at)
        write_text_atomic(target, NEW, overwrite=overwrite)
        os._exit(0)
    return os.waitpid(pid, 0)[1]

def state():
    try:
        text = open(target).read()
    except FileNotFoundError:
        return "absent"
    return {OLD: "old", NEW: "new"}.get(text, "damaged")

def clean(keep_old):
    for name in os.listdir(folder):
        os.unlink(os.path.join(folder, name))
    if keep_old:
        write_text_atomic(target, OLD)

rng = random.Random(seed)
clean(True)
report = {"overwrite": [], "new_file": [], "steps": 0}
def count_steps(overwrite):
    # the steps of one whole write, counted in a child that is never killed
    clean(overwrite)
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:
        hook(-1)
        write_text_atomic(target, NEW, overwrite=overwrite)
        os.write(w, str(count[0]).encode())
        os._exit(0)
    os.waitpid(pid, 0)
    os.close(w)
    return int(os.read(r, 64))

for overwrite, key, n in ((True, "overwrite", kills), (False, "new_file", kills // 3)):
    steps = report["steps"] = count_steps(overwrite)
    for _ in range(n):
        clean(overwrite)
        status = in_child(rng.randint(1, steps), overwrite)
        report[key].append([os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL, state()])

def contest(writers):
    clean(False)
    r, w = os.pipe()
    pids = []
    for i in range(writers):
        pid = os.fork()
        if pid == 0:
            os.close(w)
            os.read(r, 1)  # all start when the pipe closes
            try:
                write_text_atomic(target, f"writer {i}\\n")
            except DecideError:
                os._exit(3)
            os._exit(0)
        pids.append(pid)
    os.close(r)
    os.close(w)
    codes = [os.waitstatus_to_exitcode(os.waitpid(p, 0)[1]) for p in pids]
    return codes, open(target).read()

report["contests"] = [contest(6) for _ in range(8)]
print(json.dumps(report))
"""


@pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork")
def test_sigkill_never_damages_the_file_and_one_writer_wins(tmp_path: Path) -> None:
    child = subprocess.run(
        [sys.executable, "-c", KILL_CHILD, str(tmp_path), "30", "20261202"],
        env=child_env(),
        capture_output=True,
        text=True,
        timeout=TIMEOUT,
    )
    assert child.returncode == 0, child.stderr
    report = json.loads(child.stdout)
    assert report["steps"] > 10  # the text goes out in several chunks: kills land inside the write
    assert all(killed for killed, _ in report["new_file"])
    # 30 kills while overwriting: the previous file is intact or the new one complete
    assert len(report["overwrite"]) == 30
    assert all(killed for killed, _ in report["overwrite"])
    assert {state for _, state in report["overwrite"]} <= {"old", "new"}
    assert "old" in {state for _, state in report["overwrite"]}
    # kills while creating a file: no file, or the whole of it
    assert {state for _, state in report["new_file"]} <= {"absent", "new"}
    # six writers at once, none allowed to overwrite: exactly one wins, and its text is the file
    for codes, text in report["contests"]:
        assert sorted(codes) == [0] + [3] * 5
        assert text == f"writer {codes.index(0)}\n"


@pytest.mark.parametrize(
    "args",
    [
        ["optimize", str(SCENARIO), "--markdown"],
        [
            "audit",
            "--design",
            "cohort-risk",
            "--baseline",
            "8e-4",
            "--alpha",
            "0.05",
            "--effect",
            "3",
            "--p-harm",
            "0.15",
            "--per-subject",
            "250",
            "--n-per-group",
            "2150",
            "--json",
        ],
        ["interpret", str(SCENARIO), "--data", "no-such-data.toml", "--json"],
    ],
    ids=["optimize", "audit", "interpret"],
)
def test_every_output_option_is_checked_first(args: list[str], tmp_path: Path) -> None:
    # The output check comes before reading the data or computing (the data file above does not exist).
    target = tmp_path / "absent" / "out.txt"
    err = one_line(run(*args, "--output", target))
    assert err == (
        f"decide {args[0]}: --output {target}: cannot be written: the folder {tmp_path / 'absent'} does not exist\n"
    )
