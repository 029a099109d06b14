"""A comparison suite: pulses × methods × factors × swept parameters × trials, as data.

A :class:`Suite` says *what* to run; it never runs anything itself and a suite file is never
executed (it is TOML, read with :mod:`tomllib`). :func:`timescale.execute.run_suite` runs it.

Suite file form (every key optional except ``pulses``)::

    name = "adc-sweep"
    description = "Invented scenario: ..."
    methods = ["resample"]                 # default: every installed method
    factors = [0.5, 2.0, 4.0]              # or a range table, see below
    trials = 1                             # Monte Carlo trials per cell
    seed = 2026                            # root seed (omit for fresh entropy)
    technology = "example-balanced"        # preset name, a TOML card path, or a table
    keep = "metrics"                       # or "waveforms" (adds a companion dataset)
    timeout = 30.0                         # per-cell time limit, s
    sampler_jitter = 1e-12                 # rms jitter for the jitter-SNR metrics, s

    [params]                               # fixed method parameters
    capture = true                         # goes to every method that has it
    [params.resample]                      # ... or only to one method
    dac = "ideal"

    [sweep]                                # each key adds a cube dimension
    bits = [6, 8, 10, 12]
    jitter = {start = 0.1e-12, stop = 10e-12, num = 5, scale = "log"}
    corner = ["typical", "slow", "fast"]   # process corners of the card (every method)
    temperature = [233.15, 300.0, 358.15]  # operating temperature, K, within the card's range

    [[pulses]]                             # a shape constructor of timescale.Pulse
    shape = "gaussian"
    name = "g200"
    fwhm = 200e-12                         # a list or range here makes one pulse per value
    center = 1e-9
    duration = 2e-9
    rate = 100e9

    [[pulses]]                             # or samples from a CSV file (time s, value)
    csv = "echo.csv"                       # relative to the suite file
    name = "echo"

``corner`` and ``temperature`` are not method parameters: they are the card's process corner and
operating temperature. With either swept, every cell is sized on the typical card at its nominal
temperature (``technology.at_corner("typical", temperature_nominal)``) and simulated, billed and
checked against its limits on the card at that corner and temperature
(:meth:`~timescale.Technology.at_corner`), so the cube shows the spread of one design.

A range table is ``{start, stop, num, scale}`` with ``scale = "linear"`` (default, numpy
``linspace``) or ``"log"`` (``geomspace``); both ends are included.

Not-applicable convention
-------------------------
A swept parameter adds one cube dimension for every method, but a method that has no such
parameter does not depend on it. Such a method is run once, at the **first** coordinate of each
sweep dimension that does not apply to it; its other positions along those dimensions hold NaN
and the status ``"n/a"`` (with a message saying where its result is). Nothing is run or invented
for them. :func:`fill_not_applicable` copies the computed result along those dimensions when a
comparison at every coordinate is wanted; the cube attribute ``not_applicable`` (JSON) lists,
per method, the sweep dimensions that do not apply.
"""

from __future__ import annotations

import inspect
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from timescale.data.checks import read_toml
from timescale.data.errors import closest
from timescale.data.pulse import Pulse
from timescale.data.technology import DEFAULT_TECHNOLOGY, PRESETS, Technology

__all__ = ["Suite", "Plan", "expand_range", "fill_not_applicable", "PULSE_SHAPES", "KEEP", "CARD_DIMS"]

#: Pulse shapes a suite may name, mapped to the Pulse constructor.
PULSE_SHAPES = {
    "gaussian": "gaussian",
    "monocycle": "monocycle",
    "doublet": "doublet",
    "modulated": "modulated",
    "raised-cosine": "raised_cosine",
    "raised_cosine": "raised_cosine",
    "trapezoid": "trapezoid",
}
#: What a suite may keep: metrics only, or the output waveforms as well.
KEEP = ("metrics", "waveforms")
#: Names a swept parameter may not take (they are cube dims or variables already).
_RESERVED = ("method", "method_name", "pulse", "factor", "trial", "sample", "time", "status", "message", "design",
             "bill", "path", "orientation", "value")
_TOP_KEYS = ("name", "description", "pulses", "methods", "factors", "params", "sweep", "trials",
             "seed", "technology", "keep", "timeout", "sampler_jitter")
_CSV_KEYS = ("csv", "name", "time_column", "value_column", "units")
_RANGE_KEYS = ("start", "stop", "num", "scale")
#: Sweep keys that set the card a cell is evaluated on, not a method parameter: (units, long name).
CARD_DIMS = {"corner": ("", "process corner the design is evaluated at"),
             "temperature": ("K", "operating temperature the design is evaluated at")}


def _where(path: str, key) -> str:
    if isinstance(key, int):
        return f"{path}[{key}]"
    return f"{path}.{key}" if path else str(key)


def _bad(path: str, value, valid: str, hint: str = "") -> ValueError:
    return ValueError(f"{path} = {value!r}{hint} is not valid: {valid}")


def _unknown(path: str, key: str, valid) -> ValueError:
    valid = list(valid)
    return ValueError(
        f"{_where(path, key)}: unknown key {key!r}{closest(key, valid)}; valid keys: {', '.join(valid)}"
    )


def _is_real(v) -> bool:
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))


def expand_range(spec, path: str = "range") -> list:
    """Expand a list (returned as is) or a range table into its values.

    Parameters
    ----------
    spec : list or Mapping
        A list of values, or ``{"start", "stop", "num", "scale"}`` with ``scale`` one of
        ``"linear"`` (default) or ``"log"``; both ends are included.
    path : str
        Key path used in error messages.

    Returns
    -------
    list
        The values (floats for a range).
    """
    if isinstance(spec, (list, tuple, np.ndarray)):
        values = list(spec)
        if not values:
            raise _bad(path, spec, "give at least one value")
        return values
    if not isinstance(spec, Mapping):
        raise _bad(path, spec, "a list of values or a range table {start, stop, num, scale}")
    for k in spec:
        if k not in _RANGE_KEYS:
            raise _unknown(path, k, _RANGE_KEYS)
    for k in ("start", "stop", "num"):
        if k not in spec:
            raise ValueError(f"{path}: a range needs 'start', 'stop' and 'num' (missing {k!r})")
    for k in ("start", "stop"):
        if not _is_real(spec[k]) or not math.isfinite(spec[k]):
            raise _bad(_where(path, k), spec[k], "a finite number")
    num = spec["num"]
    if not isinstance(num, (int, np.integer)) or isinstance(num, bool) or num < 1:
        raise _bad(_where(path, "num"), num, "a whole number >= 1")
    scale = spec.get("scale", "linear")
    if scale == "linear":
        values = np.linspace(spec["start"], spec["stop"], int(num))
    elif scale == "log":
        if not (spec["start"] > 0 and spec["stop"] > 0):
            raise ValueError(f"{path}: a log range needs start > 0 and stop > 0, got "
                             f"start = {spec['start']!r}, stop = {spec['stop']!r}")
        values = np.geomspace(spec["start"], spec["stop"], int(num))
    else:
        raise _bad(_where(path, "scale"), scale, "'linear' or 'log'", closest(scale, ("linear", "log")))
    return [float(v) for v in values]


# ---- pulses ---------------------------------------------------------------------------------

def _shape_keys(shape: str) -> list[str]:
    ctor = getattr(Pulse, PULSE_SHAPES[shape])
    return [p for p in inspect.signature(ctor).parameters if p not in ("cls",)]


def _expand_pulse(spec, path: str, base_dir: Path | None) -> list[tuple[str, Any]]:
    """One pulse entry → [(name, Pulse or spec dict)], expanding list/range-valued shape
    parameters into one pulse per value (the cartesian product when several are swept)."""
    if isinstance(spec, Pulse):
        if spec.values.ndim != 1:
            raise ValueError(f"{path}: a pulse must hold one record, got shape {spec.values.shape}")
        return [(spec.name, spec)]
    if not isinstance(spec, Mapping):
        raise _bad(path, spec, "a timescale.Pulse or a table with 'shape' or 'csv'")
    spec = dict(spec)
    if "csv" in spec:
        for k in spec:
            if k not in _CSV_KEYS:
                raise _unknown(path, k, _CSV_KEYS)
        if not isinstance(spec["csv"], str):
            raise _bad(_where(path, "csv"), spec["csv"], "a file path (text)")
        p = Path(spec["csv"])
        if not p.is_absolute() and base_dir is not None:
            p = base_dir / p
        spec["csv"] = str(p)
        if not p.is_file():
            raise _bad(_where(path, "csv"), str(p), "an existing CSV file")
        name = spec.get("name", p.stem)
        if not isinstance(name, str):
            raise _bad(_where(path, "name"), name, "text")
        spec["name"] = name
        return [(name, spec)]
    if "shape" not in spec:
        raise ValueError(f"{path}: give 'shape' (one of {', '.join(PULSE_SHAPES)}) or 'csv'")
    shape = spec["shape"]
    if shape not in PULSE_SHAPES:
        raise _bad(_where(path, "shape"), shape, f"one of {', '.join(PULSE_SHAPES)}",
                   closest(str(shape), PULSE_SHAPES))
    valid = ["shape"] + _shape_keys(shape)
    for k in spec:
        if k not in valid:
            raise _unknown(path, k, valid)
    name = spec.get("name", shape)
    if not isinstance(name, str):
        raise _bad(_where(path, "name"), name, "text")
    swept = {}
    for k, v in spec.items():
        if k in ("shape", "name"):
            continue
        if isinstance(v, (list, tuple, Mapping)):
            swept[k] = expand_range(v, _where(path, k))
            vals = swept[k]
        else:
            vals = [v]
        for i, x in enumerate(vals):
            if not _is_real(x):
                kp = _where(_where(path, k), i) if k in swept else _where(path, k)
                raise _bad(kp, x, "a number (SI units)")
    out = []
    combos = [dict()]
    for k, vals in swept.items():
        combos = [dict(c, **{k: v}) for c in combos for v in vals]
    for c in combos:
        one = dict(spec, **c)
        label = name if not c else name + " " + " ".join(f"{k}={v:.4g}" for k, v in c.items())
        one["name"] = label
        out.append((label, one))
    return out


def _build_pulse(spec, path: str) -> Pulse:
    if isinstance(spec, Pulse):
        return spec
    spec = dict(spec)
    try:
        if "csv" in spec:
            kw = {k: spec[k] for k in ("time_column", "value_column", "units") if k in spec}
            return Pulse.from_csv(spec["csv"], name=spec["name"], **kw)
        shape = spec.pop("shape")
        return getattr(Pulse, PULSE_SHAPES[shape])(**spec)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"{path}: {exc}") from None


# ---- technology -----------------------------------------------------------------------------

def _technology(spec, path: str, base_dir: Path | None):
    """Return (Technology, JSON-able description)."""
    if spec is None:
        return DEFAULT_TECHNOLOGY
    if isinstance(spec, Technology):
        return spec
    if isinstance(spec, str):
        if spec in PRESETS:
            return PRESETS[spec]
        p = Path(spec)
        if not p.is_absolute() and base_dir is not None:
            p = base_dir / p
        if p.suffix.lower() == ".toml" or p.exists():
            try:
                return Technology.from_toml(p)
            except ValueError as exc:
                raise ValueError(f"{path}: {exc}") from None
        raise _bad(path, spec, f"a preset ({', '.join(PRESETS)}) or a TOML card path",
                   closest(spec, PRESETS))
    if isinstance(spec, Mapping):
        try:
            return Technology.from_dict(dict(spec), where=path)
        except TypeError as exc:
            raise ValueError(f"{path}: {exc}") from None
    raise _bad(path, spec, "a preset name, a TOML card path or a table of fields")


# ---- the suite ------------------------------------------------------------------------------

def _freeze(v):
    if isinstance(v, Mapping):
        return {k: _freeze(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return tuple(_freeze(x) for x in v)
    return v


@dataclass(frozen=True)
class Suite:
    """A comparison suite: what to run, as data (nothing is executed by building it).

    Parameters
    ----------
    pulses : Pulse, sequence or mapping
        Input pulses: :class:`~timescale.Pulse` objects, or tables ``{"shape": ..., **kw}``
        naming a Pulse constructor (``gaussian``, ``monocycle``, ``doublet``, ``modulated``,
        ``raised-cosine``, ``trapezoid``) and its keyword arguments in SI units, or
        ``{"csv": path, ...}``. A list or range as a shape parameter makes one pulse per value.
        A mapping gives the names.
    methods : sequence of str or Method, optional
        Methods to compare (default: every installed method at run time).
    factors : sequence of float or range table
        Stretch factors α (> 1 stretches, < 1 compresses).
    params : Mapping, optional
        Fixed method parameters: ``name -> value`` goes to every selected method that has the
        parameter; ``method name -> {name: value}`` to that method only.
    sweep : Mapping, optional
        ``parameter -> list or range table``; each adds a cube dimension (in this order).
        ``corner`` (names) and ``temperature`` (K) sweep the card instead: every cell is sized
        on the typical card at its nominal temperature and evaluated at the corner.
    trials : int
        Monte Carlo trials per cell (a ``trial`` dimension when > 1).
    seed : int, optional
        Root seed; cell i draws from ``SeedSequence(seed).spawn_key = (i,)``. None picks fresh
        entropy (recorded in the cube and the checkpoint).
    technology : str, Path, Mapping or Technology, optional
        A preset name, a TOML card path, a table of fields (with optional ``base``), or a card.
    keep : {"metrics", "waveforms"}
        Keep the output waveforms too (a companion dataset).
    timeout : float, optional
        Per-cell time limit, s; a cell that exceeds it is recorded as failed.
    sampler_jitter : float
        RMS jitter for the jitter-limited SNR metrics, s.
    name, description : str
        Labels recorded in the cube.
    base_dir : Path, optional
        Folder that relative CSV and card paths are resolved against (the suite file's folder).
    """

    pulses: Any
    methods: Any = None
    factors: Any = (2.0,)
    params: Mapping[str, Any] = field(default_factory=dict)
    sweep: Mapping[str, Any] = field(default_factory=dict)
    trials: int = 1
    seed: int | None = None
    technology: Any = None
    keep: str = "metrics"
    timeout: float | None = None
    sampler_jitter: float = 1e-12
    name: str = "suite"
    description: str = ""
    base_dir: Path | None = field(default=None, compare=False)

    def __post_init__(self):
        set_ = lambda k, v: object.__setattr__(self, k, v)  # noqa: E731 (frozen dataclass)
        base = None if self.base_dir is None else Path(self.base_dir)
        set_("base_dir", base)
        # pulses: normalise to a tuple of (name, Pulse | spec)
        raw = self.pulses
        if isinstance(raw, (list, tuple)) and raw and all(
                isinstance(e, tuple) and len(e) == 2 and isinstance(e[0], str) for e in raw):
            raw = dict(raw)  # the normalised form below (e.g. from dataclasses.replace)
        if isinstance(raw, Pulse) or (isinstance(raw, Mapping) and ("shape" in raw or "csv" in raw)):
            raw = [raw]
        entries = []
        if isinstance(raw, Mapping):
            for k, spec in raw.items():
                if isinstance(spec, Mapping):
                    spec = dict(spec, name=spec.get("name", k))
                got = _expand_pulse(spec, _where("pulses", k), base)
                if isinstance(spec, Pulse):
                    got = [(str(k), spec)]
                entries += got
        elif isinstance(raw, (list, tuple)):
            if not raw:
                raise _bad("pulses", raw, "give at least one pulse")
            for i, spec in enumerate(raw):
                entries += _expand_pulse(spec, _where("pulses", i), base)
        else:
            raise _bad("pulses", raw, "a Pulse, a list of pulses/tables or a mapping of names")
        names = [n for n, _ in entries]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise ValueError(f"pulses: the names {', '.join(map(repr, dup))} are used twice; give each pulse its own 'name'")
        set_("pulses", tuple((n, _freeze(s) if isinstance(s, Mapping) else s) for n, s in entries))
        # methods
        if self.methods is not None:
            ms = [self.methods] if isinstance(self.methods, str) else list(self.methods)
            if not ms:
                raise _bad("methods", self.methods, "at least one method name (or omit for all)")
            for i, m in enumerate(ms):
                if not isinstance(m, str) and not hasattr(m, "simulate"):
                    raise _bad(_where("methods", i), m, "a method name or a timescale Method")
            labels = [m if isinstance(m, str) else m.name for m in ms]
            if len(set(labels)) != len(labels):
                raise _bad("methods", labels, "each method once")
            set_("methods", tuple(ms))
        # factors
        fs = self.factors
        if _is_real(fs):
            fs = [fs]
        fs = expand_range(fs, "factors")
        for i, f in enumerate(fs):
            if not _is_real(f) or not math.isfinite(f) or f <= 0:
                raise _bad(_where("factors", i), f, "a finite number > 0 (α > 1 stretches, α < 1 compresses)")
        if len(set(map(float, fs))) != len(fs):
            raise _bad("factors", fs, "distinct values")
        set_("factors", tuple(float(f) for f in fs))
        # params and sweep: structure only here; method-aware checks in plan()
        if not isinstance(self.params, Mapping):
            raise _bad("params", self.params, "a table of parameter = value")
        set_("params", _freeze(dict(self.params)))
        if not isinstance(self.sweep, Mapping):
            raise _bad("sweep", self.sweep, "a table of parameter = list or range")
        sweep = {}
        for k, v in self.sweep.items():
            if k in _RESERVED:
                raise _bad(f"sweep.{k}", v, f"a method parameter; {k!r} is a name the cube uses already")
            vals = expand_range(v, f"sweep.{k}")
            for i, x in enumerate(vals):
                if not isinstance(x, (str, bool, int, float, np.integer, np.floating)):
                    raise _bad(f"sweep.{k}[{i}]", x, "a number, text or true/false")
            if len(set(vals)) != len(vals):
                raise _bad(f"sweep.{k}", vals, "distinct values")
            sweep[k] = tuple(vals)
        set_("sweep", sweep)
        # scalars
        t = self.trials
        if not isinstance(t, (int, np.integer)) or isinstance(t, bool) or t < 1:
            raise _bad("trials", t, "a whole number >= 1")
        set_("trials", int(t))
        if self.seed is not None and (not isinstance(self.seed, (int, np.integer)) or isinstance(self.seed, bool) or self.seed < 0):
            raise _bad("seed", self.seed, "a whole number >= 0 (or omit it for fresh entropy)")
        if self.keep not in KEEP:
            raise _bad("keep", self.keep, f"one of {', '.join(map(repr, KEEP))}", closest(str(self.keep), KEEP))
        if self.timeout is not None and (not _is_real(self.timeout) or not self.timeout > 0 or not math.isfinite(self.timeout)):
            raise _bad("timeout", self.timeout, "a time limit per cell in seconds, > 0 (or omit it)")
        if not _is_real(self.sampler_jitter) or not self.sampler_jitter > 0:
            raise _bad("sampler_jitter", self.sampler_jitter, "an rms jitter in seconds, > 0")
        for k in ("name", "description"):
            if not isinstance(getattr(self, k), str):
                raise _bad(k, getattr(self, k), "text")
        tech = _technology(self.technology, "technology", base)
        set_("technology", tech)

    # -- construction -----------------------------------------------------------------------
    @classmethod
    def from_dict(cls, data: Mapping, *, base_dir=None, where: str = "") -> "Suite":
        """Build a suite from a parsed suite file (see the module docstring).

        Raises
        ------
        ValueError
            Naming the key path, the value and what is valid, for an unknown key (with the
            closest valid one), a bad value, or a parameter no selected method has.
        """
        if not isinstance(data, Mapping):
            raise _bad(where or "suite", data, "a table")
        try:
            for k in data:
                if k not in _TOP_KEYS:
                    raise _unknown("", k, _TOP_KEYS)
            if "pulses" not in data:
                raise ValueError("pulses: a suite needs at least one [[pulses]] entry")
            suite = cls(**dict(data), base_dir=base_dir)
            suite.plan()  # method-aware checks now, before anything runs
        except ValueError as exc:
            raise ValueError(f"{where}{exc}") from None
        return suite

    @classmethod
    def from_toml(cls, path) -> "Suite":
        """Load a suite file (TOML; data only, nothing in it is executed).

        Relative CSV and technology-card paths are resolved against the file's folder.
        """
        path = Path(path)
        data = read_toml(path, "suite file")
        return cls.from_dict(data, base_dir=path.resolve().parent, where=f"suite file {str(path)!r}: ")

    # -- description ------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """The suite as JSON-able data (Pulse objects are summarised, not stored)."""
        pulses = []
        for n, s in self.pulses:
            if isinstance(s, Pulse):
                pulses.append({"name": n, "samples": int(s.n), "rate": s.rate, "t0": s.t0, "from": "Pulse object"})
            else:
                pulses.append(json.loads(json.dumps(s, default=list)))
        return {
            "name": self.name, "description": self.description, "pulses": pulses,
            "methods": None if self.methods is None else [m if isinstance(m, str) else m.name for m in self.methods],
            "factors": list(self.factors),
            "params": json.loads(json.dumps(self.params, default=repr)),
            "sweep": {k: list(v) for k, v in self.sweep.items()},
            "trials": self.trials, "seed": self.seed, "technology": self.technology.name,
            "keep": self.keep, "timeout": self.timeout, "sampler_jitter": self.sampler_jitter,
        }

    def plan(self) -> "Plan":
        """Resolve methods and parameters into the cell layout (checks everything that needs
        the installed methods; runs nothing but the pulse constructors)."""
        from timescale.contract.registry import (
            available_methods,
            get_method,
            method_sources,
        )

        names = list(available_methods()) if self.methods is None else None
        src = self.methods if self.methods is not None else names
        if not src:
            raise ValueError("methods: no methods are installed or registered")
        mlist = []
        for i, m in enumerate(src):
            try:
                mlist.append(get_method(m))
            except (ValueError, TypeError) as exc:
                raise ValueError(f"{_where('methods', i)}: {exc}") from None
        sources = method_sources()
        mnames = [m.name for m in mlist]
        # fixed params: global ones go to owners; method tables to that method
        per: dict[str, dict] = {m.name: {} for m in mlist}
        for k, v in self.params.items():
            if isinstance(v, Mapping):
                if k not in per:
                    raise _unknown("params", k, sorted({f for m in mlist for f in m.param_fields()} | set(per)))
                m = mlist[mnames.index(k)]
                for pk, pv in v.items():
                    if pk not in m.param_fields():
                        raise _unknown(f"params.{k}", pk, sorted(m.param_fields()))
                    per[k][pk] = pv
                continue
            owners = [m for m in mlist if k in m.param_fields()]
            if not owners:
                raise _unknown("params", k, sorted({f for m in mlist for f in m.param_fields()} | set(per)))
            for m in owners:
                per[m.name].setdefault(k, v)
        for m in mlist:
            try:
                m.make_params(**per[m.name])
            except (TypeError, ValueError) as exc:
                raise ValueError(f"params: {exc}") from None
        # sweep: each key must belong to some method; values must fit each owner's type
        sweep_axes = []
        applies: dict[str, tuple[str, ...]] = {}
        for k, vals in self.sweep.items():
            if k in CARD_DIMS:  # the card's corner or temperature: applies to every method
                for i, v in enumerate(vals):
                    try:
                        if k == "corner":
                            self.technology.at_corner(v)
                        else:
                            self.technology.at_corner("typical", v)
                    except (TypeError, ValueError) as exc:
                        raise ValueError(f"sweep.{k}[{i}] = {v!r} is not valid: {exc}") from None
                sweep_axes.append((k, vals) + CARD_DIMS[k])
                applies[k] = tuple(mnames)
                continue
            owners = [m for m in mlist if k in m.param_fields()]
            if not owners:
                raise _unknown("sweep", k, sorted({f for m in mlist for f in m.param_fields()}))
            f0 = owners[0].param_fields()[k]
            if isinstance(f0.default, int) and not isinstance(f0.default, bool):
                # a range gives floats; whole-valued ones are taken as the integers they name
                vals = tuple(int(v) if isinstance(v, float) and v.is_integer() else v for v in vals)
            for i, v in enumerate(vals):
                for m in owners:
                    fixed = {pk: pv for pk, pv in per[m.name].items() if pk not in self.sweep}
                    try:
                        m.make_params(**fixed, **{k: v})
                    except (TypeError, ValueError) as exc:
                        raise ValueError(f"sweep.{k}[{i}] = {v!r} is not valid: {exc}") from None
            units = f0.metadata.get("units", "")
            sweep_axes.append((k, vals, units, f0.metadata.get("doc", "") or k))
            applies[k] = tuple(m.name for m in owners)
        # pulses are built here (cheap, deterministic) so errors surface before any run
        pulses = {n: _build_pulse(s, f"pulses[{n!r}]") for n, s in self.pulses}
        shipped = {m.name: (None if (isinstance(src[i], str) and not sources.get(m.name, "").startswith("registered in code")) else m)
                   for i, m in enumerate(mlist)}
        return Plan(
            methods=tuple(mnames),
            method_objects=shipped,
            versions={m.name: (m.version, m.summary) for m in mlist},
            params={k: dict(v) for k, v in per.items()},
            pulses=pulses,
            factors=self.factors,
            sweep=tuple(sweep_axes),
            applies=applies,
            trials=self.trials,
            technology=self.technology,
            sampler_jitter=float(self.sampler_jitter),
            keep_waveform=self.keep == "waveforms",
            timeout=None if self.timeout is None else float(self.timeout),
        )

    def n_cells(self) -> int:
        """Number of cells (positions in the cube, including not-applicable ones)."""
        return self.plan().n_cells


@dataclass(frozen=True)
class Plan:
    """The resolved cell layout of a suite; picklable and sent once to each worker.

    Cell ``i`` is the C-order position on the dims (``method``, ``pulse``, ``factor``, then one
    per swept parameter). Methods are carried by name; ``method_objects[name]`` holds the object
    only for methods registered in code or passed as objects (they cannot be found by name in a
    fresh process).
    """

    methods: tuple
    method_objects: dict
    versions: dict
    params: dict
    pulses: dict
    factors: tuple
    sweep: tuple  # ((name, values, units, long_name), ...)
    applies: dict  # swept name -> method names it applies to
    trials: int
    technology: Technology
    sampler_jitter: float
    keep_waveform: bool
    timeout: float | None

    @property
    def shape(self) -> tuple[int, ...]:
        return (len(self.methods), len(self.pulses), len(self.factors)) + tuple(len(s[1]) for s in self.sweep)

    @property
    def n_cells(self) -> int:
        return int(np.prod(self.shape))

    def axes(self):
        """The cube's cell dims as :class:`timescale.cube.Axis`."""
        from timescale.runner.cube import Axis

        ax = [Axis("method_name", list(self.methods)), Axis("pulse", list(self.pulses)),
              Axis("factor", list(self.factors))]
        for name, vals, units, long_name in self.sweep:
            ax.append(Axis(name, list(vals), units, long_name))
        return ax

    def not_applicable(self) -> dict[str, list[str]]:
        """``{method: [swept parameters it does not have]}``."""
        return {m: [s[0] for s in self.sweep if m not in self.applies[s[0]]] for m in self.methods}

    def cell(self, index: int, entropy: int):
        """Return the :class:`~timescale.run.CellSpec` of cell `index`, or a not-applicable
        :class:`~timescale.run.Row` when the position only repeats a sweep value the method
        does not have."""
        from timescale.runner.cells import CellSpec, Row

        pos = np.unravel_index(int(index), self.shape)
        m = self.methods[pos[0]]
        params = dict(self.params[m])
        skipped = []
        card = {}
        for d, (name, vals, _, _) in enumerate(self.sweep):
            if name in CARD_DIMS:
                card[name] = vals[pos[3 + d]]
            elif m in self.applies[name]:
                params[name] = vals[pos[3 + d]]
            elif pos[3 + d] != 0:
                skipped.append(f"{name}={vals[0]!r}")
        if skipped:
            return Row(int(index), "n/a",
                       f"swept parameter(s) do not apply to method {m!r}; its result is at {', '.join(skipped)}",
                       orientation=0)
        pname = list(self.pulses)[pos[1]]
        obj = self.method_objects.get(m)
        return CellSpec(int(index), obj if obj is not None else m, params, pname, self.pulses[pname],
                        self.factors[pos[2]], self.trials, entropy, self.technology,
                        self.sampler_jitter, self.keep_waveform, card.get("corner"),
                        card.get("temperature"))


def fill_not_applicable(ds):
    """Return a copy of a cube with every ``"n/a"`` position filled from the run it refers to
    (the first coordinate of each sweep dimension that does not apply to the method).

    The result is constant along those dimensions, as the method does not depend on them; the
    status keeps ``"n/a"`` so filled positions stay recognisable.
    """
    na = json.loads(ds.attrs.get("not_applicable", "{}"))
    out = ds.copy(deep=True)
    methods = [str(m) for m in ds["method_name"].values]
    for m, dims in na.items():
        if not dims or m not in methods:
            continue
        k = methods.index(m)
        for v in ds.data_vars:
            da = ds[v]
            if v in ("status", "message") or "method_name" not in da.dims or not any(d in da.dims for d in dims):
                continue
            a = np.moveaxis(out[v].values, da.dims.index("method_name"), 0)  # a view on out's data
            sub = a[k]
            sub_dims = [d for d in da.dims if d != "method_name"]
            src = sub[tuple(slice(0, 1) if d in dims else slice(None) for d in sub_dims)]
            sub[...] = np.broadcast_to(src, sub.shape)
    return out
