"""Noise profiles as TOML files: reading, checking and the built-in demo.

A profile file has these keys (units in the key names; every key but the raw
pair is optional and defaults to a perfect operation)::

    name = "my-lab"                 # label for reports and run folders
    note = "what this profile is"   # free text, printed by `stillroom profile`

    [raw_pair]                      # exactly one of:
    werner_fidelity = 0.9           #   fidelity F of a Werner pair
    bell = [0.9, 0.03, 0.03, 0.04]  #   Bell weights Phi+, Psi+, Psi-, Phi- (I, X, Y, Z)

    [operations]
    two_qubit = 0.99                # probability a CNOT is perfect, [0, 1]
    single_qubit = 0.999            # probability a rotation is perfect, [0, 1]
    measurement = 0.995             # probability an outcome is right, [0.5, 1]

    [memory]
    t1_s = 10.0                     # amplitude-damping time, seconds (> 0, inf)
    t2_s = 1.0                      # coherence time, seconds (> 0, <= 2 t1_s;
                                    #   absent: 2 t1_s, no extra dephasing)

    [link]
    length_km = 30.0                # fibre length, km (>= 0)
    pair_rate_hz = 200.0            # raw-pair rate, per second (> 0, inf)

Every problem raises :class:`~optimise.errors.InputError` with a one-line
message that names the file, the key, the bad value and the fix.

Examples
--------
>>> p = parse_profile('[raw_pair]\\nwerner_fidelity = 0.9\\n', source="x.toml")
>>> p.raw_pair[0], p.name
(0.9, 'x')
>>> parse_profile('[raw_pair]\\nwerner_fidelity = 0.9\\n[operations]\\ntwo_qbit = 1')
Traceback (most recent call last):
...
optimise.errors.InputError: <profile>: unknown key [operations] two_qbit; did you mean two_qubit?
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from models import NodeNoise, hashing_yield, werner
from models.profile import FIBRE_SPEED_KM_S, Profile
from models.states import BELL_NAMES

from .errors import InputError, user_input

DEMO_RESOURCE = "demo.toml"


@dataclass(frozen=True)
class Parameter:
    """One numeric key of a profile file.

    ``low``/``high`` bound the value; ``open_low`` excludes ``low`` itself;
    ``infinite`` allows ``inf`` (TOML spelling ``inf``), meaning "never decays"
    or "instantly".
    """

    section: str
    name: str
    low: float
    high: float
    meaning: str
    unit: str = ""
    open_low: bool = False
    infinite: bool = False
    default: float | None = None

    def allowed(self) -> str:
        left = "(" if self.open_low else "["
        if self.high == math.inf:
            right = "inf]" if self.infinite else "inf)"
        else:
            right = f"{self.high:g}]"
        return f"{left}{self.low:g}, {right}"

    def check(self, value, source: str) -> float:
        where = f"{source}: [{self.section}] {self.name}"
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(
                f"{where} = {_show(value)} is not a number; it is {self.meaning}"
                f"{' in ' + self.unit if self.unit else ''}"
            )
        try:
            value = float(value)
        except OverflowError:  # an integer beyond any float
            value = math.inf if value > 0 else -math.inf
        bad = (
            math.isnan(value)
            or value < self.low
            or value > self.high
            or (self.open_low and value == self.low)
            or (value == math.inf and not self.infinite)
        )
        if bad:
            raise InputError(
                f"{where} = {_show(value)} is outside {self.allowed()}; it is {self.meaning}"
            )
        return value


PARAMETERS: dict[str, Parameter] = {
    p.name: p
    for p in (
        Parameter("raw_pair", "werner_fidelity", 0.0, 1.0, "the raw pair's fidelity with Phi+"),
        Parameter(
            "operations",
            "two_qubit",
            0.0,
            1.0,
            "the probability that a CNOT is perfect",
            default=1.0,
        ),
        Parameter(
            "operations",
            "single_qubit",
            0.0,
            1.0,
            "the probability that a single-qubit rotation is perfect",
            default=1.0,
        ),
        Parameter(
            "operations",
            "measurement",
            0.5,
            1.0,
            "the probability that a measurement outcome is reported correctly",
            default=1.0,
        ),
        Parameter(
            "memory",
            "t1_s",
            0.0,
            math.inf,
            "a memory's amplitude-damping time in seconds (inf: no decay)",
            unit="s",
            open_low=True,
            infinite=True,
            default=math.inf,
        ),
        Parameter(
            "memory",
            "t2_s",
            0.0,
            math.inf,
            "a memory's coherence time in seconds (inf: no decay)",
            unit="s",
            open_low=True,
            infinite=True,
            default=math.inf,
        ),
        Parameter(
            "link", "length_km", 0.0, math.inf, "the fibre length in km", unit="km", default=0.0
        ),
        Parameter(
            "link",
            "pair_rate_hz",
            0.0,
            math.inf,
            "the mean raw-pair rate per second (inf: instantly)",
            unit="Hz",
            open_low=True,
            infinite=True,
            default=math.inf,
        ),
    )
}

SECTIONS: dict[str, tuple[str, ...]] = {
    "raw_pair": ("werner_fidelity", "bell"),
    "operations": ("two_qubit", "single_qubit", "measurement"),
    "memory": ("t1_s", "t2_s"),
    "link": ("length_km", "pair_rate_hz"),
}
TOP_LEVEL = ("name", "note")

UNDISTILLABLE = (
    "recurrence and pumping can only raise a pair whose largest Bell weight exceeds 1/2, "
    "so no recipe here can purify it"
)


def _show(value) -> str:
    if isinstance(value, float):
        return f"{value:g}"
    text = repr(value) if isinstance(value, str) else str(value)
    return text if len(text) <= 40 else f"{text[:30]}... ({len(text)} characters)"


def _suggest(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f"; did you mean {close[0]}?" if close else ""


def _home_of(key: str) -> str | None:
    for section, keys in SECTIONS.items():
        if key in keys:
            return section
    return None


def _check_keys(data: dict, source: str) -> None:
    for key, value in data.items():
        if key in TOP_LEVEL:
            if not isinstance(value, str):
                raise InputError(f"{source}: {key} = {_show(value)} must be a string in quotes")
            continue
        if key in SECTIONS:
            if not isinstance(value, dict):
                raise InputError(
                    f"{source}: {key} must be a table, written [{key}] on its own line"
                )
            for inner in value:
                if inner not in SECTIONS[key]:
                    home = _home_of(inner)
                    if home is not None:
                        hint = f"; it belongs in [{home}]"
                    else:
                        hint = _suggest(inner, SECTIONS[key])
                        if not hint:
                            everywhere = [k for keys in SECTIONS.values() for k in keys]
                            hint = _suggest(inner, everywhere) or (
                                f"; [{key}] takes {', '.join(SECTIONS[key])}"
                            )
                    raise InputError(f"{source}: unknown key [{key}] {inner}{hint}")
            continue
        home = _home_of(key)
        if home is not None:
            raise InputError(f"{source}: key {key} must sit under [{home}], not at the top level")
        hint = _suggest(key, list(SECTIONS) + list(TOP_LEVEL))
        if not hint:
            everywhere = [k for keys in SECTIONS.values() for k in keys]
            hint = _suggest(key, everywhere) or (
                f"; the top level takes {', '.join(TOP_LEVEL)} and the tables "
                f"{', '.join('[' + s + ']' for s in SECTIONS)}"
            )
        raise InputError(f"{source}: unknown key {key}{hint}")


def _raw_pair(section: dict, source: str) -> tuple[float, float, float, float]:
    has_f = "werner_fidelity" in section
    has_bell = "bell" in section
    if has_f == has_bell:
        what = "both" if has_f else "neither"
        raise InputError(
            f"{source}: [raw_pair] has {what} of werner_fidelity and bell; give exactly one"
        )
    if has_f:
        f = PARAMETERS["werner_fidelity"].check(section["werner_fidelity"], source)
        weights = tuple(float(w) for w in werner(f))
    else:
        bell = section["bell"]
        if (
            not isinstance(bell, list)
            or len(bell) != 4
            or any(isinstance(w, bool) or not isinstance(w, (int, float)) for w in bell)
        ):
            raise InputError(
                f"{source}: [raw_pair] bell = {_show(bell)} must be a list of four numbers, "
                f"the weights of {', '.join(BELL_NAMES)}"
            )
        for k, w in enumerate(bell):
            if math.isnan(w) or not 0.0 <= w <= 1.0:
                raise InputError(
                    f"{source}: [raw_pair] bell[{k}] ({BELL_NAMES[k]}) = {_show(float(w))} is "
                    "outside [0, 1]; each Bell weight is a probability"
                )
        total = math.fsum(bell)
        if abs(total - 1.0) > 1e-9:
            raise InputError(
                f"{source}: [raw_pair] bell sums to {total:.12g}; the four weights must sum to 1"
            )
        weights = tuple(float(w) for w in bell)
    largest = max(weights)
    if largest <= 0.5:
        k = weights.index(largest)
        raise InputError(
            f"{source}: the raw pair's largest Bell weight is {largest:g} ({BELL_NAMES[k]}); "
            + UNDISTILLABLE
        )
    return weights  # type: ignore[return-value]


def profile_from_data(data: dict, source: str = "<profile>") -> Profile:
    """Build a :class:`models.Profile` from parsed TOML data (a dict), checking every key."""
    _check_keys(data, source)
    if "raw_pair" not in data:
        raise InputError(
            f"{source}: no [raw_pair] table; add one with werner_fidelity = F or bell = [4 weights]"
        )
    raw = _raw_pair(data["raw_pair"], source)
    values = {}
    for section in ("operations", "memory", "link"):
        for key in SECTIONS[section]:
            spec = PARAMETERS[key]
            given = data.get(section, {}).get(key)
            values[key] = spec.default if given is None else spec.check(given, source)
    if "t2_s" not in data.get("memory", {}):
        values["t2_s"] = 2 * values["t1_s"]  # no dephasing beyond what damping causes
    if values["t2_s"] > 2 * values["t1_s"]:
        raise InputError(
            f"{source}: [memory] t2_s = {_show(values['t2_s'])} exceeds 2 * t1_s = "
            f"{_show(2 * values['t1_s'])}; amplitude damping alone limits T2 to 2 T1"
        )
    name = data.get("name") or (Path(source).stem if not source.startswith("<") else "profile")
    with user_input(source):  # the model's own checks, should ours miss one
        profile = Profile(
            raw_pair=raw,
            noise=NodeNoise(
                two_qubit=values["two_qubit"],
                single_qubit=values["single_qubit"],
                measurement=values["measurement"],
                t1_s=values["t1_s"],
                t2_s=values["t2_s"],
            ),
            length_km=values["length_km"],
            pair_rate_hz=values["pair_rate_hz"],
            name=name,
        )
    _check_derived(profile, source)
    return profile


# recipes of each step kind: if these give finite figures, the profile's derived rates do
_PROBE_RECIPES = ("raw", "sY", "pY", "dsY", "dpY", "sY~.pX(sY)")


def _check_derived(profile: Profile, source: str) -> None:
    """Every figure the model derives from the profile is finite (``t1_s = 5e-324`` is not).

    A value inside its range may still overflow where the model divides by it or
    takes it to a power; a few probe recipes of every step kind are evaluated with
    floating-point errors raised, so such a profile is refused here, in one line,
    rather than as a NaN deep inside a search.
    """
    import numpy as np

    from models.evaluate import evaluate

    noise = profile.noise
    for name, value in (("t1_s", noise.t1_s), ("t2_s", noise.t2_s)):
        if value and not math.isfinite(1.0 / value):  # the decay rate the memory model uses
            raise InputError(
                f"{source}: [memory] {name} = {value:g} s gives an infinite decay rate; "
                "give a time of at least 1e-300 s"
            )
    if profile.pair_rate_hz and not math.isfinite(1.0 / profile.pair_rate_hz):
        raise InputError(
            f"{source}: [link] pair_rate_hz = {profile.pair_rate_hz:g} gives an infinite mean "
            "wait; give a rate of at least 1e-300 Hz"
        )
    try:
        with np.errstate(over="raise", invalid="raise", divide="raise"):
            for recipe in _PROBE_RECIPES:
                result = evaluate(recipe, profile)
                figures = [*result.bell, result.pair_yield, result.raw_pairs_per_output]
                if result.time_per_output_s is not None:
                    figures.append(result.time_per_output_s)
                if not all(math.isfinite(float(x)) for x in figures):
                    raise FloatingPointError(f"a figure of {recipe} is not finite")
    except (FloatingPointError, OverflowError, ZeroDivisionError, ValueError) as error:
        raise InputError(
            f"{source}: the model's figures overflow for this profile ({error}); a time, "
            "rate or length is too extreme to compute with"
        ) from None


MAX_PROFILE_BYTES = 256 * 1024  # a profile is a dozen lines; anything larger is not one


def parse_profile(text: str, source: str = "<profile>") -> Profile:
    """Parse the text of a profile file; ``source`` names it in error messages."""
    if len(text) > MAX_PROFILE_BYTES:
        raise InputError(
            f"{source}: {len(text):,d} characters; a profile has at most "
            f"{MAX_PROFILE_BYTES:,d} (it is a dozen lines)"
        )
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise InputError(f"{source}: not valid TOML: {' '.join(str(error).split())}") from None
    except RecursionError:  # the TOML reader recurses once per nested table or array
        raise InputError(f"{source}: not valid TOML for a profile: nested too deep") from None
    except (OverflowError, ValueError, MemoryError) as error:
        raise InputError(f"{source}: not valid TOML for a profile: {error}") from None
    return profile_from_data(data, source)


def load_profile(path) -> Profile:
    """Read and check a profile file; raises :class:`InputError` on any problem."""
    path = Path(path)
    try:
        with path.open("rb") as handle:
            raw = handle.read(MAX_PROFILE_BYTES + 1)
        if len(raw) > MAX_PROFILE_BYTES:
            raise InputError(
                f"{path}: larger than {MAX_PROFILE_BYTES:,d} bytes; a profile is a dozen lines"
            )
        text = raw.decode("utf-8")
    except FileNotFoundError:
        raise InputError(f"profile file {str(path)!r} not found") from None
    except IsADirectoryError:
        raise InputError(f"{path} is a folder; give a profile file (.toml)") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a UTF-8 text file; a profile is TOML text") from None
    except OSError as error:
        raise InputError(f"cannot read profile {str(path)!r}: {error.strerror}") from None
    return parse_profile(text, source=str(path))


def demo_toml() -> str:
    """Text of the built-in demo profile (an invented scenario, commented)."""
    return resources.files(__package__).joinpath(DEMO_RESOURCE).read_text(encoding="utf-8")


def demo_profile() -> Profile:
    """The built-in demo profile (invented figures; see :func:`demo_toml`)."""
    return parse_profile(demo_toml(), source=DEMO_RESOURCE)


def profile_note(path=None) -> str | None:
    """The free-text ``note`` of a profile file (or of the demo when ``path`` is None)."""
    if path is None:
        text = demo_toml()
    else:
        with Path(path).open("rb") as handle:  # already read once by load_profile: bounded
            text = handle.read(MAX_PROFILE_BYTES + 1).decode("utf-8", errors="replace")
    try:
        note = tomllib.loads(text).get("note")
    except (ValueError, RecursionError, OverflowError):
        return None
    return note if isinstance(note, str) else None


def resolve_profile(path=None) -> tuple[Profile, str]:
    """The profile at ``path`` (or the demo), with a label saying where it came from."""
    if path is None:
        return demo_profile(), "built-in demo profile (invented figures)"
    return load_profile(path), str(path)


def _toml_number(value: float) -> str:
    if value == math.inf:
        return "inf"
    return repr(float(value))


def profile_to_toml(profile: Profile, note: str | None = None) -> str:
    """A profile as the text of a profile file (inverse of :func:`parse_profile`)."""
    n = profile.noise
    lines = [f"name = {_toml_string(profile.name)}"]
    if note:
        lines.append(f"note = {_toml_string(note)}")
    raw = profile.raw_pair
    lines += ["", "[raw_pair]", f"bell = [{', '.join(repr(float(w)) for w in raw)}]"]
    lines += ["", "[operations]"]
    lines += [f"{k} = {_toml_number(getattr(n, k))}" for k in SECTIONS["operations"]]
    lines += ["", "[memory]"]
    lines += [f"{k} = {_toml_number(getattr(n, k))}" for k in SECTIONS["memory"]]
    lines += ["", "[link]"]
    lines += [f"{k} = {_toml_number(getattr(profile, k))}" for k in SECTIONS["link"]]
    return "\n".join(lines) + "\n"


def _toml_string(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def parameter_value(profile: Profile, name: str) -> float:
    """Current value of the sweepable parameter ``name`` in ``profile``."""
    if name == "werner_fidelity":
        return profile.raw_pair[0]
    if name in SECTIONS["operations"] or name in SECTIONS["memory"]:
        return getattr(profile.noise, name)
    return getattr(profile, name)


def with_parameter(profile: Profile, name: str, value: float) -> Profile:
    """A copy of ``profile`` with one parameter changed (checked like a file value).

    ``werner_fidelity`` replaces the raw pair by a Werner pair of that fidelity.
    """
    source = f"{name} = {_show(float(value))}"
    if name not in PARAMETERS:
        raise InputError(
            f"unknown parameter {name!r}{_suggest(name, PARAMETERS)}"
            f" (one of {', '.join(PARAMETERS)})"
        )
    spec = PARAMETERS[name]
    value = spec.check(value, "sweep")
    with user_input(f"sweep at {source}"):
        if name == "werner_fidelity":
            if value <= 0.5:
                raise InputError(
                    f"sweep: werner_fidelity = {_show(value)} leaves a largest Bell weight of at "
                    f"most 1/2; {UNDISTILLABLE}"
                )
            return dataclasses.replace(profile, raw_pair=tuple(float(w) for w in werner(value)))
        if spec.section in ("operations", "memory"):
            return dataclasses.replace(
                profile, noise=dataclasses.replace(profile.noise, **{name: value})
            )
        return dataclasses.replace(profile, **{name: value})


def describe(profile: Profile) -> list[tuple[str, str, str]]:
    """What a profile means, as rows (quantity, value, explanation) for people."""
    n = profile.noise
    raw = profile.raw
    rows = [
        (
            "raw pair",
            ", ".join(f"{b} {w:.4g}" for b, w in zip(BELL_NAMES, raw, strict=True)),
            "Bell weights (Pauli-frame order I, X, Y, Z)",
        ),
        ("raw fidelity", f"{raw[0]:.6g}", "weight of Phi+"),
        (
            "hashing yield",
            f"{float(hashing_yield(raw)):.6f}",
            "1 - S(p), Bennett, DiVincenzo, Smolin, Wootters, PRA 54, 3824 (1996); the "
            "rate with perfect operations, not a bound on finite-fidelity recipes",
        ),
        (
            "two_qubit",
            f"{n.two_qubit:g}",
            "probability a CNOT is perfect (both nodes: "
            f"{n.two_qubit**2:.6g} that a bilateral CNOT is)",
        ),
        ("single_qubit", f"{n.single_qubit:g}", "probability a rotation is perfect"),
        (
            "measurement",
            f"{n.measurement:g}",
            "probability an outcome is right (a parity "
            f"check is wrong with probability {2 * n.measurement * (1 - n.measurement):.3g})",
        ),
        ("t1_s", _seconds(n.t1_s), "memory amplitude-damping time"),
        ("t2_s", _seconds(n.t2_s), "memory coherence time"),
        (
            "length_km",
            f"{profile.length_km:g}",
            "one-way classical delay " + _seconds(profile.length_km / FIBRE_SPEED_KM_S),
        ),
        (
            "pair_rate_hz",
            "inf" if math.isinf(profile.pair_rate_hz) else f"{profile.pair_rate_hz:g}",
            "mean wait for a raw pair " + _seconds(1.0 / profile.pair_rate_hz),
        ),
    ]
    return rows


def _seconds(t: float) -> str:
    if math.isinf(t):
        return "inf (none)"
    if t == 0:
        return "0 s"
    for scale, unit in ((1.0, "s"), (1e-3, "ms"), (1e-6, "us"), (1e-9, "ns")):
        if t >= scale:
            return f"{t / scale:.3g} {unit}"
    return f"{t:.3g} s"
