"""A corpus of bad inputs: each gives exit code 2, one line on stderr, nothing on stdout,
nothing written, no traceback.

The rule "a command-line tool reports a usage or input error as one line on stderr
and exit status 2" is common practice (no source; POSIX utilities and argparse use
status 2 for usage errors). The corpus is generated from templates: malformed
command lines, recipe strings and profiles. Most cases run through ``main(argv)`` in
this process; a sample runs through a subprocess, where a timeout guards against a
hang (it is never what is tested).
"""

from __future__ import annotations

import itertools
import os
import subprocess
import sys
from pathlib import Path

import pytest

from models.notation import LIMITS_SENTENCE, MAX_LENGTH, MAX_NESTING, MAX_REPEAT, MAX_ROUNDS
from optimise.cli import main
from optimise.profiles import MAX_PROFILE_BYTES, demo_toml

ROOT = Path(__file__).resolve().parents[2]

# ----------------------------------------------------------------------------- command lines
OPTION_VALUES = {
    "--depth": ["0", "-1", "13", "1000", "x", "1.5", "", "9" * 400],
    "--trials": ["0", "-5", "abc", "1e3", ""],
    "--time": ["-5s", "0", "0s", "5x", "inf", "nan", "h", "", "-1h30m"],
    "--target": ["0.5", "1", "1.5", "-0.9", "x", "nan", ""],
    "--objectives": ["", "fidelity", "yield", "fidelity,fidelity", "fidelity,cost", "memory"],
    "--max-memory": ["0", "-2", "two"],
    "--max-time-per-output": ["-1", "0", "soon"],
    "--exhaustive-depth": ["-1", "x"],
    "--deep-width": ["-1", "257", "x", "1.5", "", "9" * 400],
    "--deep-layers": ["-1", "257", "two", ""],
    "--deep-levels": ["-1", "13", "auto", "0.5"],
    "--check-rounds": ["", "4", "1:1", "6:2", "4:0", "4:9", "a:b", "4:4,", "4:4:4", "9" * 400],
    "--check-rounds-top": ["0", "-1", "513", "x", ""],
    "--workers": ["0", "-3", "many", "257"],
    "--seed": ["x", "1.5", "-1", str(2**40)],
    "--sampler": ["cmaes", "", "NSGA2"],
    "--name": ["../escape", "", ".", "..", "a/b", "x" * 300, "-dash", " sp", "a b", "\u00e9"],
    "--runs-dir": [""],
    "--storage": ["", "ftp://h/x", "sqlite://x", "journal:", "notes.txt", "mysql+nodriver://u@h/d"],
    "--dask-scheduler": [
        "",
        "localhost:8786",
        "http://h:8786",
        "tcp://",
        "tcp://h",
        "tcp://h:0",
        "tcp://h:99999",
        "tcp://h:x",
        "tcp://h:8786/path",
        "tcp://" + "h" * 400 + ":1",
    ],
}
SEARCH_CASES = [
    ["search", option, value] for option, values in OPTION_VALUES.items() for value in values
]
SEARCH_CASES += [["search", option] for option in OPTION_VALUES]  # a value missing
SEARCH_CASES += [
    ["search", "--deep-width", "0", "--deep-layers", "0"],  # every pair kept: refused
    ["search", "--bogus"],
    ["search", "a.toml", "b.toml"],
    ["search", "missing.toml"],
    ["frobnicate"],
    ["--no-such-flag"],
    ["evaluate"],
    ["sweep"],
    ["sweep", "two_qubit"],
    ["sweep", "nonsense", "0", "1"],
    ["table"],
    ["table", "runs/none"],
    ["profile", "missing.toml"],
    ["catalogue", "--pairs", "1"],
    ["catalogue", "--pairs", "6"],
    ["catalogue", "--pairs", "four"],
    ["catalogue", "--cnots", "0"],
    ["catalogue", "--cnots", "9"],
    ["catalogue", "--top", "-1"],
    ["catalogue", "--cache", ""],
    ["catalogue", "missing.toml"],
    ["evaluate", "sY", "missing.toml"],
    ["evaluate", "demo.toml", "sY"],  # the wrong order
    [],  # no command: help on stderr, exit 2
]

# ----------------------------------------------------------------------------- recipes
RECIPES = [
    "",
    " ",
    "q",
    "sY.q",
    "sY~x",
    "sY..pY",
    "sY^",
    "sY^1",
    "sY^0",
    "sY^2^3",
    "p(",
    "p(sY",
    "pY)",
    "s(sY)",
    "~~sY",
    "sY.~pY",
    "raw.sY",
    "sYYY",
    "dsYY",
    "sY^99999999999999999999",
    f"sY^{MAX_REPEAT + 1}",
    "sY^999999",
    "sY^3000",
    ".".join(["sY"] * (MAX_ROUNDS + 1)),
    "sY." * 10_000 + "sY",
    "p(" * 1000 + "sY" + ")" * 1000,
    "p(" * (MAX_NESTING + 1) + "sY" + ")" * (MAX_NESTING + 1),
    "s" * (MAX_LENGTH + 1),
    "dejmps:99999999",
    "dejmps:0",
    "dejmps:-1",
    "dejmps:x",
    "dejmp:2",
    ":3",
    "dejmps:" + "9" * 5000,
    "sY\x00",
    "s\u0663",  # an Arabic-Indic digit is not a rotation
    "sY^\u0663",
]
RECIPE_CASES = [["evaluate", r] for r in RECIPES] + [["evaluate", r, "--json"] for r in RECIPES]

# ----------------------------------------------------------------------------- profiles
BASE = "[raw_pair]\nwerner_fidelity = 0.9\n"
PROFILE_TEXTS = {
    "empty": "",
    "not toml": "this is = = not toml",
    "no raw pair": "[operations]\ntwo_qubit = 0.99\n",
    "nested arrays": "x = " + "[" * 5000 + "]" * 5000 + "\n",
    "nested tables": "x = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n",
    "huge integer": BASE + "[link]\nlength_km = " + "9" * 400 + "\n",
    "huge negative": BASE + "[link]\nlength_km = -" + "9" * 400 + "\n",
    "tiny t1": BASE + "[memory]\nt1_s = 5e-324\nt2_s = 5e-324\n",
    "tiny rate": BASE + "[link]\npair_rate_hz = 5e-324\n",
    "too big": "# " + "a" * (MAX_PROFILE_BYTES + 10) + "\n" + BASE,
    "binary": None,  # written as bytes below
    "unknown key": BASE + "[operations]\ntwo_qbit = 0.99\n",
    "unknown table": BASE + "[hardware]\nx = 1\n",
    "string value": BASE + "[operations]\ntwo_qubit = 'high'\n",
    "bool value": BASE + "[operations]\ntwo_qubit = true\n",
    "nan": BASE + "[operations]\ntwo_qubit = nan\n",
    "inf gate": BASE + "[operations]\ntwo_qubit = inf\n",
    "t2 over 2 t1": BASE + "[memory]\nt1_s = 1.0\nt2_s = 3.0\n",
    "undistillable": "[raw_pair]\nwerner_fidelity = 0.5\n",
    "bell wrong length": "[raw_pair]\nbell = [0.9, 0.1]\n",
    "bell not summing": "[raw_pair]\nbell = [0.9, 0.1, 0.1, 0.1]\n",
    "key at top": "werner_fidelity = 0.9\n",
    "long string": BASE + "name = 1\n",
}
for key, low, high in [
    ("two_qubit", -0.1, 1.1),
    ("single_qubit", -1, 2),
    ("measurement", -0.5, 1.5),
]:
    for bad in (low, high, "'x'", "[1]"):
        PROFILE_TEXTS[f"{key} {bad}"] = BASE + f"[operations]\n{key} = {bad}\n"
for key in ("t1_s", "t2_s"):
    for bad in (0, -1, "'x'", "[]"):
        PROFILE_TEXTS[f"{key} {bad}"] = BASE + f"[memory]\n{key} = {bad}\n"
for key in ("length_km", "pair_rate_hz"):
    for bad in (-1, "'x'", "{}", "nan"):
        PROFILE_TEXTS[f"{key} {bad}"] = BASE + f"[link]\n{key} = {bad}\n"
for bad in (-0.1, 1.1, 0.25, "'x'", "nan", "inf"):
    PROFILE_TEXTS[f"werner_fidelity {bad}"] = f"[raw_pair]\nwerner_fidelity = {bad}\n"
PROFILE_COMMANDS = (["profile"], ["evaluate", "sY"], ["search"], ["sweep", "two_qubit", "0.9", "1"])
PROFILE_CASES = [
    (name, [*command[:1], *command[1:]]) for name, command in itertools.product(
        PROFILE_TEXTS, PROFILE_COMMANDS
    )
]  # fmt: skip


def write_profile(folder: Path, name: str) -> Path:
    path = folder / "bad.toml"
    if PROFILE_TEXTS[name] is None:
        path.write_bytes(b"\xff\xfe\x00binary")
    else:
        path.write_text(PROFILE_TEXTS[name], encoding="utf-8")
    return path


def check_one_line(code, out, err, case):
    assert code == 2, (case, err)
    assert out == "", (case, out)
    assert err.endswith("\n") and "Traceback" not in err, (case, err)
    if case:  # `stillroom` alone prints its help (on stderr)
        assert err.count("\n") == 1, (case, err)
        assert err.startswith("stillroom"), (case, err)
        assert len(err) < 1200, (case, len(err))


def files_in(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "demo.toml").write_text(demo_toml(), encoding="utf-8")
    return tmp_path


@pytest.mark.parametrize("case", SEARCH_CASES + RECIPE_CASES, ids=lambda c: repr(c)[:60])
def test_a_bad_command_line_or_recipe_is_one_line(workdir, capsys, case):
    before = files_in(workdir)
    code = main(list(case) + (["--no-progress"] if case[:1] == ["search"] else []))
    out, err = capsys.readouterr()
    check_one_line(code, out, err, case)
    assert files_in(workdir) == before, case  # nothing written


@pytest.mark.parametrize("name, command", PROFILE_CASES, ids=lambda c: str(c)[:40])
def test_a_bad_profile_is_one_line_for_every_command(workdir, capsys, name, command):
    path = write_profile(workdir, name)
    before = files_in(workdir)
    argv = [*command, str(path)]
    if command[0] == "search":
        argv += ["--no-progress"]
    code = main(argv)
    out, err = capsys.readouterr()
    check_one_line(code, out, err, argv)
    assert files_in(workdir) == before, argv


def test_the_limits_are_stated_in_the_help(capsys):
    assert main(["evaluate", "--help"]) == 0
    assert " ".join(LIMITS_SENTENCE.split()) in " ".join(capsys.readouterr().out.split())


# ----------------------------------------------------------------------------- file system
def test_file_system_faults_are_one_line_and_write_nothing(workdir, capsys):
    (workdir / "afile").write_text("x")
    (workdir / "afolder.db").mkdir()
    cases = [
        ["search", "--runs-dir", "afile"],  # the runs folder is a file
        ["search", "--runs-dir", "afile/deeper"],
        ["search", "--storage", "afolder.db"],  # a storage path that is a folder
        ["search", "--storage", "/proc/stillroom-x.db"],
        ["search", "--storage", "afile/x.log"],
    ]
    if os.geteuid() != 0:  # root writes anywhere: the unwritable folder needs a user
        (workdir / "locked").mkdir(mode=0o500)
        cases.append(["search", "--runs-dir", "locked"])
    for case in cases:
        before = files_in(workdir)
        code = main([*case, "--trials", "3", "--no-progress"])
        out, err = capsys.readouterr()
        check_one_line(code, out, err, case)
        assert files_in(workdir) == before, (case, err)


def test_a_sweep_output_folder_that_is_a_file_is_refused_before_the_sweep(workdir, capsys):
    # refused at once: the sweep's evaluation is never reached (common practice, no source)
    (workdir / "afile").write_text("x")
    for out_dir in ("afile", "afile/deeper"):
        before = files_in(workdir)
        case = ["sweep", "two_qubit", "0.95", "1", "--out", out_dir, "--no-progress"]
        code = main(case)
        out, err = capsys.readouterr()
        check_one_line(code, out, err, case)
        assert "afile" in err and files_in(workdir) == before


def test_a_run_folder_that_is_a_file(workdir, capsys):
    (workdir / "runs").mkdir()
    (workdir / "runs" / "demo-metro").write_text("not a folder")
    before = files_in(workdir)
    code = main(["search", "--trials", "3", "--no-progress"])
    out, err = capsys.readouterr()
    check_one_line(code, out, err, ["search"])
    assert "demo-metro" in err and files_in(workdir) == before


def test_a_full_disk_is_one_line_exit_1_and_the_study_resumes(workdir, capsys, monkeypatch):
    # a fault of the machine (ENOSPC) while the front is written: one line, exit 1, no
    # half-written file, and the same command resumes afterwards
    import errno

    import optimise.files

    real = optimise.files.os.fsync
    calls = {"n": 0}

    def full(fd):
        calls["n"] += 1
        if calls["n"] == 6:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(fd)

    monkeypatch.setattr(optimise.files.os, "fsync", full)
    args = ["search", "--depth", "2", "--trials", "10", "--exhaustive-depth", "1", "--no-progress"]
    assert main(args) == 1
    out, err = capsys.readouterr()
    assert err.count("\n") == 1 and "No space left on device" in err and "Traceback" not in err
    assert not [p for p in (workdir / "runs").rglob("*.tmp")]  # nothing half-written
    monkeypatch.setattr(optimise.files.os, "fsync", real)
    assert main(args + ["--json"]) == 0


# ----------------------------------------------------------------------------- subprocesses
SAMPLE = SEARCH_CASES[::9] + RECIPE_CASES[::7] + [["evaluate", "p(" * 1000 + "sY" + ")" * 1000]]
SAMPLE = [case for case in SAMPLE if "\x00" not in "".join(case)]  # argv cannot hold NUL


@pytest.mark.slow
def test_a_sample_through_the_real_command(tmp_path):
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    (tmp_path / "demo.toml").write_text(demo_toml(), encoding="utf-8")
    before = files_in(tmp_path)
    for case in SAMPLE:
        done = subprocess.run(
            [sys.executable, "-m", "optimise.cli", *case],
            cwd=tmp_path,
            env=env,
            capture_output=True,
            text=True,
            timeout=120,  # a guard against a hang only
            stdin=subprocess.DEVNULL,
        )
        check_one_line(done.returncode, done.stdout, done.stderr, case)
        assert files_in(tmp_path) == before, case


def test_the_corpus_is_a_few_hundred_cases():
    assert len(SEARCH_CASES) + len(RECIPE_CASES) + len(PROFILE_CASES) >= 300


def test_a_setting_the_search_refuses_names_the_option(workdir, capsys):
    # the user typed --exhaustive-depth, not the settings field (common practice, no source)
    case = ["search", "--depth", "3", "--exhaustive-depth", "5", "--no-progress"]
    code = main(case)
    out, err = capsys.readouterr()
    check_one_line(code, out, err, case)
    assert "--exhaustive-depth" in err and "exhaustive_depth" not in err
