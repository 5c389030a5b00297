"""Noise profiles: the TOML keys, the demo profile and every kind of bad profile."""

from __future__ import annotations

import json
import math
import tomllib

import pytest
from cli_support import files_under, run_cli, validate
from hypothesis import given, settings
from hypothesis import strategies as st

from models import NodeNoise
from models.profile import Profile
from optimise.cli import main
from optimise.errors import InputError
from optimise.profiles import (
    demo_profile,
    demo_toml,
    parameter_value,
    parse_profile,
    profile_to_toml,
    with_parameter,
)

GOOD = """\
name = "bench"
[raw_pair]
werner_fidelity = 0.9
[operations]
two_qubit = 0.98
single_qubit = 0.999
measurement = 0.99
[memory]
t1_s = 5
[link]
length_km = 12.5
pair_rate_hz = 1000
"""

# (case, file text, fragment the one-line message must contain)
BAD = [
    (
        "unknown key",
        "[raw_pair]\nwerner_fidelity = 0.9\n[operations]\ntwo_qbit = 0.99\n",
        "unknown key [operations] two_qbit; did you mean two_qubit?",
    ),
    (
        "unknown table",
        "[raw_pair]\nwerner_fidelity = 0.9\n[memroy]\nt1_s = 1\n",
        "unknown key memroy; did you mean memory?",
    ),
    (
        "key in the wrong table",
        "[raw_pair]\nwerner_fidelity = 0.9\n[link]\nt1_s = 1\n",
        "it belongs in [memory]",
    ),
    (
        "gate out of range",
        "[raw_pair]\nwerner_fidelity = 0.9\n[operations]\ntwo_qubit = 1.3\n",
        "[operations] two_qubit = 1.3 is outside [0, 1]",
    ),
    (
        "measurement out of range",
        "[raw_pair]\nbell = [0.9, 0.05, 0.03, 0.02]\n[operations]\nmeasurement = 0.3\n",
        "measurement = 0.3 is outside [0.5, 1]",
    ),
    (
        "negative memory time",
        "[raw_pair]\nwerner_fidelity = 0.9\n[memory]\nt1_s = -2\n",
        "t1_s = -2 is outside (0, inf]",
    ),
    (
        "t2 above 2 t1",
        "[raw_pair]\nwerner_fidelity = 0.9\n[memory]\nt1_s = 1\nt2_s = 3\n",
        "t2_s = 3 exceeds 2 * t1_s = 2",
    ),
    (
        "not a number",
        '[raw_pair]\nwerner_fidelity = 0.9\n[operations]\ntwo_qubit = "high"\n',
        "two_qubit = 'high' is not a number",
    ),
    (
        "bell weights do not sum to 1",
        "[raw_pair]\nbell = [0.8, 0.05, 0.03, 0.02]\n",
        "bell sums to 0.9",
    ),
    (
        "two raw pairs",
        "[raw_pair]\nwerner_fidelity = 0.9\nbell = [0.9, 0.05, 0.03, 0.02]\n",
        "has both of werner_fidelity and bell",
    ),
    ("no raw pair", "[operations]\ntwo_qubit = 0.99\n", "no [raw_pair] table"),
    (
        "largest weight 1/2 (bell)",
        "[raw_pair]\nbell = [0.5, 0.5, 0.0, 0.0]\n",
        "largest Bell weight is 0.5 (Phi+); recurrence and pumping can only raise a pair",
    ),
    (
        "largest weight below 1/2 (Werner)",
        "[raw_pair]\nwerner_fidelity = 0.45\n",
        "largest Bell weight is 0.45 (Phi+)",
    ),
    (
        "malformed TOML",
        "[raw_pair]\nwerner_fidelity = 0.9\n\n[operations]\ntwo_qubit = = 1\n",
        "not valid TOML",
    ),
]


@pytest.mark.parametrize(("case", "text", "fragment"), BAD, ids=[b[0] for b in BAD])
def test_bad_profile_direct(tmp_path, capsys, case, text, fragment):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    assert main(["profile", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.count("\n") == 1 and fragment in err, err
    assert err.startswith("stillroom: ") and str(path) in err


def test_malformed_toml_names_the_line(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(BAD[-1][1])
    with pytest.raises(InputError, match=r"line 5"):
        parse_profile(path.read_text(), source=str(path))


@pytest.mark.slow
@pytest.mark.parametrize(("case", "text", "fragment"), BAD, ids=[b[0] for b in BAD])
def test_bad_profile_search_writes_nothing(tmp_path, case, text, fragment):
    """End to end: exit code 2, one line on stderr, no traceback, no file written."""
    (tmp_path / "bad.toml").write_text(text)
    done = run_cli("search", "bad.toml", "--runs-dir", "runs", "--no-progress", cwd=tmp_path)
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr.count("\n") == 1 and fragment in done.stderr, done.stderr
    assert "Traceback" not in done.stderr
    assert files_under(tmp_path) == ["bad.toml"]


def test_missing_profile_file(tmp_path, capsys):
    assert main(["evaluate", "sY", str(tmp_path / "nowhere.toml")]) == 2
    err = capsys.readouterr().err
    assert "not found" in err and err.count("\n") == 1


def test_good_profile_keys():
    p = parse_profile(GOOD, source="bench.toml")
    assert p == Profile(
        raw_pair=(0.9, (1 - 0.9) / 3, (1 - 0.9) / 3, (1 - 0.9) / 3),
        noise=NodeNoise(two_qubit=0.98, single_qubit=0.999, measurement=0.99, t1_s=5.0, t2_s=10.0),
        length_km=12.5,
        pair_rate_hz=1000.0,
        name="bench",
    )


def test_absent_t2_means_no_dephasing_beyond_damping():
    p = parse_profile("[raw_pair]\nwerner_fidelity = 0.9\n[memory]\nt1_s = 3\n")
    assert p.noise.t2_s == 6.0  # T2 = 2 T1: amplitude damping alone (common practice, no source)
    p = parse_profile("[raw_pair]\nwerner_fidelity = 0.9\n[memory]\nt2_s = 3\n")
    assert (p.noise.t1_s, p.noise.t2_s) == (math.inf, 3.0)


def test_absent_keys_mean_perfect_and_name_comes_from_the_file():
    p = parse_profile("[raw_pair]\nbell = [0.9, 0.05, 0.03, 0.02]\n", source="lab/my-link.toml")
    assert p.name == "my-link"
    assert p.noise == NodeNoise()
    assert (p.length_km, p.pair_rate_hz) == (0.0, math.inf)


def test_demo_profile_is_documented_as_invented(capsys):
    assert main(["profile"]) == 0
    out = capsys.readouterr().out
    assert out == demo_toml()
    assert "INVENTED" in out and "made up" in out
    data = tomllib.loads(out)
    assert "invented" in data["note"]
    assert parse_profile(out) == demo_profile()
    assert main(["profile", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "profile")
    assert "invented" in document["note"]


def test_profile_file_prints_hashing_yield(tmp_path, capsys):
    # hashing yield 1 - S(p): Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824 (1996);
    # worked values from shared/conventions.md: F = 0.9 -> 0.372508, F = 0.95 -> 0.634355
    for f, expected in ((0.9, "0.372508"), (0.95, "0.634355")):
        path = tmp_path / f"w{f}.toml"
        path.write_text(f"[raw_pair]\nwerner_fidelity = {f}\n")
        assert main(["profile", str(path)]) == 0
        out = capsys.readouterr().out
        assert "hashing yield" in out and expected in out
        assert main(["profile", str(path), "--json"]) == 0
        document = json.loads(capsys.readouterr().out)
        validate(document, "profile")
        assert document["raw_hashing_yield"] == pytest.approx(float(expected), abs=5e-7)


def test_with_parameter_changes_one_value_and_checks_it():
    base = demo_profile()
    assert with_parameter(base, "two_qubit", 0.97).noise.two_qubit == 0.97
    assert with_parameter(base, "length_km", 5).length_km == 5.0
    assert parameter_value(with_parameter(base, "werner_fidelity", 0.8), "werner_fidelity") == 0.8
    with pytest.raises(InputError, match=r"outside \[0, 1\]"):
        with_parameter(base, "two_qubit", 1.01)
    with pytest.raises(InputError, match="largest Bell weight"):
        with_parameter(base, "werner_fidelity", 0.5)
    with pytest.raises(InputError, match="2 T1"):
        with_parameter(base, "t2_s", 3 * base.noise.t1_s)
    with pytest.raises(InputError, match="did you mean two_qubit"):
        with_parameter(base, "two_qbit", 0.9)


@settings(max_examples=40, deadline=None)
@given(
    f=st.floats(0.5001, 1.0),
    split=st.lists(st.floats(0.0, 1.0), min_size=3, max_size=3),
    p2=st.floats(0.0, 1.0),
    p1=st.floats(0.0, 1.0),
    eta=st.floats(0.5, 1.0),
    t1=st.one_of(st.just(math.inf), st.floats(1e-6, 1e6)),
    ratio=st.floats(0.01, 2.0),
    length=st.floats(0.0, 1e4),
    rate=st.one_of(st.just(math.inf), st.floats(1e-3, 1e9)),
)
def test_profile_toml_round_trip(f, split, p2, p1, eta, t1, ratio, length, rate):
    total = sum(split) or 1.0
    rest = [(1.0 - f) * s / total for s in split] if sum(split) else [(1.0 - f) / 3] * 3
    raw = [f, *rest]
    raw[0] = 1.0 - math.fsum(raw[1:])
    profile = Profile(
        raw_pair=tuple(raw),
        noise=NodeNoise(
            two_qubit=p2,
            single_qubit=p1,
            measurement=eta,
            t1_s=t1,
            t2_s=t1 * ratio if math.isfinite(t1) else math.inf,
        ),
        length_km=length,
        pair_rate_hz=rate,
        name='odd "name" \\ here',
    )
    assert parse_profile(profile_to_toml(profile)) == profile
