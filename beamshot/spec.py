"""A beam specification: target figures with tolerances, read from a small TOML file.

A maker states, per figure of the report (keys of :data:`beamshot.vocabulary.FIGURES`, and of
the shape and artefact figures when the vocabulary has them), the range a sample must lie in, in one of three forms (docs/spec.md)::

    [spec]
    name = "prototype 4, 30 mm reflector"   # optional, printed with the result
    coverage_factor = 2                      # k of the interval value +- k u (default 2, ~95 %)

    [figures.hotspot_angle]                  # target with a symmetric tolerance: 8 +- 1 deg
    target = 8.0
    tolerance = 1.0
    unit = "deg"

    [figures.field_angle]                    # target with deviations (lower <= 0 <= upper): 20 -2/+3
    target = 20.0
    tolerance = [-2.0, 3.0]
    unit = "deg"

    [figures.peak_intensity]                 # one-sided or two-sided limits
    min = 20000
    unit = "cd"

Every figure that has a unit must state it (``unit``), and it must be the report's unit: the
spec never converts, so a limit written in another unit is refused rather than misread.  A spec
with an unknown key, a figure name that does not exist, a unit that does not match, a tolerance
that is not a positive number (or deviations of the wrong sign), or a range that is empty is
refused in one line naming the file, the line and the fix (:class:`BeamshotError`).

The limits are closed intervals ``[low, high]`` (either side may be open, +-inf); how a measured
interval is judged against them is in :mod:`beamshot.qa`.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

from .errors import BeamshotError, read_user_file

__all__ = ["Limit", "Spec", "DEFAULT_COVERAGE_FACTOR", "read_spec", "parse_spec", "known_figures"]

#: Coverage factor k of the interval value +- k u when the spec does not give one: k = 2 gives a
#: level of confidence of about 95 % for a normal distribution (JCGM 100:2008, 6.3.3).
DEFAULT_COVERAGE_FACTOR = 2.0
#: The largest coverage factor accepted (k = 3 is ~99.7 %; more would judge almost nothing).
MAX_COVERAGE_FACTOR = 5.0

_SPEC_KEYS = ("name", "coverage_factor", "note")
_LIMIT_KEYS = ("target", "tolerance", "min", "max", "unit", "note")
#: Spellings of a unit accepted beside the report's own (the report writes "deg" and "" for none).
_UNIT_ALIASES = {"°": "deg", "degree": "deg", "degrees": "deg", "none": "", "1": ""}


def known_figures() -> dict:
    """The figure vocabulary, key -> Term: the report's ``figures``, its beam shape and artefact
    figures (report.json ``shape``) and its colour figures (hotspot CCT... from ``colour``, when
    the analysis measured colour); read when a spec is checked, so figures added later are known."""
    from . import vocabulary

    return {**vocabulary.FIGURES, **vocabulary.SHAPE_FIGURES, **vocabulary.COLOUR_FIGURES}


@dataclass(frozen=True)
class Limit:
    """The accepted range of one figure: ``low <= value <= high`` (``-inf``/``inf`` when open).

    ``text`` is the limit as the maker wrote it (``8 ± 1 deg``, ``≥ 20000 cd``), ``line`` the line
    of the spec file that states it.
    """

    figure: str
    low: float
    high: float
    unit: str
    text: str
    line: int | None = None
    note: str | None = None

    def to_dict(self) -> dict:
        return {"figure": self.figure, "min": None if math.isinf(self.low) else self.low,
                "max": None if math.isinf(self.high) else self.high, "unit": self.unit, "text": self.text,
                "line": self.line, "note": self.note}


@dataclass(frozen=True)
class Spec:
    """A parsed specification: its limits in file order and the coverage factor k."""

    limits: tuple[Limit, ...]
    coverage_factor: float = DEFAULT_COVERAGE_FACTOR
    name: str | None = None
    source: str | None = None
    note: str | None = None

    def to_dict(self) -> dict:
        return {"name": self.name, "source": self.source, "coverage_factor": self.coverage_factor,
                "note": self.note, "limits": [lim.to_dict() for lim in self.limits]}


def read_spec(path) -> Spec:
    """Read and check a spec file (TOML); one-line :class:`BeamshotError` on any problem."""
    raw = read_user_file(path, "give the spec's .toml file")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise BeamshotError(f"{path}: not a text file; give the spec as TOML (see docs/spec.md)") from None
    return parse_spec(text, source=str(path))


def _toml():
    try:
        import tomllib
    except ImportError:  # Python 3.10
        try:
            import tomli as tomllib
        except ImportError:
            raise BeamshotError("reading a spec needs Python 3.11 or the 'tomli' package (pip install tomli)") from None
    return tomllib


class _Lines:
    """Where a key sits in the TOML text (tomllib does not report it): the line of ``key =``
    after the header of its table, or of the inline table ``figure = {...}``; a best effort for
    messages only."""

    _HEADER = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(#.*)?$")

    def __init__(self, text: str):
        self.lines = text.splitlines()

    @staticmethod
    def _key_re(key: str):
        return re.compile(r'^\s*(?:"%s"|\'%s\'|%s)\s*=' % ((re.escape(key),) * 3))

    def _table(self, dotted: str) -> int | None:
        want = dotted.replace(" ", "")
        for i, line in enumerate(self.lines):
            m = self._HEADER.match(line)
            if m and m.group(1).replace(" ", "").replace('"', "") == want:
                return i
        return None

    def _in_table(self, start: int, key: str) -> int | None:
        pat = self._key_re(key)
        for i in range(start + 1, len(self.lines)):
            if self._HEADER.match(self.lines[i]):
                return None
            if pat.match(self.lines[i]):
                return i
        return None

    def of(self, table: str, key: str | None = None) -> int | None:
        """1-based line of ``key`` in ``table`` (``figures.hotspot_angle``), or of the table."""
        head = self._table(table)
        if head is not None:
            if key is None:
                return head + 1
            found = self._in_table(head, key)
            return (found if found is not None else head) + 1
        parent, _, leaf = table.rpartition(".")
        ph = self._table(parent) if parent else -1
        if ph is not None:
            at = self._in_table(ph, leaf)
            if at is not None:
                if key is not None:  # inline table: the key on the same line (or the lines after it)
                    pat = re.compile(r'[{,]\s*(?:"%s"|%s)\s*=' % (re.escape(key), re.escape(key)))
                    for i in range(at, min(at + 5, len(self.lines))):
                        if pat.search(self.lines[i]):
                            return i + 1
                return at + 1
        if key is not None and not parent:
            at = self._in_table(-1, key)
            return None if at is None else at + 1
        return None


def _where(source: str | None, line: int | None) -> str:
    src = source or "spec"
    return f"{src}, line {line}" if line else src


def _number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _fmt(x: float) -> str:
    return f"{x:,g}"


def parse_spec(text: str, *, source: str | None = None) -> Spec:
    """Parse the TOML text of a spec (see the module docstring); ``source`` names it in messages."""
    tomllib = _toml()
    src = source or "spec"
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise BeamshotError(f"{src}: not valid TOML ({exc}); see docs/spec.md") from None
    lines = _Lines(text)

    def fail(line, message):
        raise BeamshotError(f"{_where(src, line)}: {message}")

    for key in data:
        if key not in ("spec", "figures"):
            fail(lines.of(key) or lines.of("", key), f"unknown table or key {key!r}; a spec has a [spec] table "
                 "and [figures.<name>] tables (see docs/spec.md)")
    head = data.get("spec", {})
    if not isinstance(head, dict):
        fail(lines.of("", "spec"), "'spec' must be a table: [spec]")
    for key in head:
        if key not in _SPEC_KEYS:
            fail(lines.of("spec", key), f"unknown key {key!r} in [spec]; known: {', '.join(_SPEC_KEYS)}")
    k = head.get("coverage_factor", DEFAULT_COVERAGE_FACTOR)
    if not _number(k) or not 0 < k <= MAX_COVERAGE_FACTOR:
        fail(lines.of("spec", "coverage_factor"), f"coverage_factor must be a number above 0 and at most "
             f"{MAX_COVERAGE_FACTOR:g} (2 gives about 95 %), not {k!r}")
    for key in ("name", "note"):
        if key in head and not isinstance(head[key], str):
            fail(lines.of("spec", key), f"{key} must be text in quotes")

    figures = data.get("figures")
    if not isinstance(figures, dict) or not figures:
        fail(lines.of("figures") or lines.of("", "figures"),
             "the spec states no figure; add a table such as [figures.hotspot_angle] (see docs/spec.md)")
    vocab = known_figures()
    limits = []
    for name, body in figures.items():
        table = f"figures.{name}"
        line = lines.of(table)
        if name not in vocab:
            close = difflib.get_close_matches(name, list(vocab), n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            fail(line, f"no figure is called {name!r}; {hint}known figures: {', '.join(vocab)}")
        if not isinstance(body, dict):
            fail(line, f"{name} must be a table of limits, e.g. [figures.{name}] with min/max or target/tolerance")
        limits.append(_limit(name, body, vocab[name].unit, lambda key, t=table: lines.of(t, key), src))
    return Spec(limits=tuple(limits), coverage_factor=float(k), name=head.get("name"), source=source,
                note=head.get("note"))


def _limit(name: str, body: dict, unit: str, line_of, src: str) -> Limit:
    """One figure's table -> :class:`Limit` (see the module docstring for the forms)."""

    def fail(key, message):
        raise BeamshotError(f"{_where(src, line_of(key))}: {message}")

    for key in body:
        if key not in _LIMIT_KEYS:
            fail(key, f"unknown key {key!r} in [figures.{name}]; known: {', '.join(_LIMIT_KEYS)}")
    for key in ("target", "min", "max"):
        if key in body and not _number(body[key]):
            fail(key, f"{name}: {key} must be a finite number, not {body[key]!r}")
    # the unit: required for a figure that has one; never converted
    shown = unit or "no unit"
    if "unit" in body:
        given = body["unit"]
        if not isinstance(given, str):
            fail("unit", f"{name}: unit must be text in quotes, e.g. unit = \"{unit}\"")
        norm = _UNIT_ALIASES.get(given.strip(), given.strip())
        if norm != unit:
            fail("unit", f"{name} is reported in {shown}, not {given!r}; write the limits in {shown}"
                 + (f" and unit = \"{unit}\"" if unit else " and leave out unit"))
    elif unit:
        fail(None, f"{name}: state the unit of its limits, unit = \"{unit}\"")
    note = body.get("note")
    if note is not None and not isinstance(note, str):
        fail("note", f"{name}: note must be text in quotes")

    has_target = "target" in body or "tolerance" in body
    has_range = "min" in body or "max" in body
    u = "°" if unit == "deg" else (f" {unit}" if unit else "")
    if has_target and has_range:
        fail("target" if "target" in body else "tolerance",
             f"{name}: give either target and tolerance, or min and/or max, not both")
    if has_target:
        if "target" not in body:
            fail("tolerance", f"{name}: a tolerance needs a target, e.g. target = 8.0")
        if "tolerance" not in body:
            fail("target", f"{name}: a target needs a tolerance, e.g. tolerance = 1.0 (±) or [-1.0, 2.0]")
        t, tol = float(body["target"]), body["tolerance"]
        if _number(tol):
            if tol <= 0:
                fail("tolerance", f"{name}: tolerance must be above 0 (it is the ± half-width), not {tol!r}")
            low, high, text = t - tol, t + tol, f"{_fmt(t)} ± {_fmt(tol)}{u}"
        elif isinstance(tol, list) and len(tol) == 2 and all(_number(x) for x in tol):
            lo, hi = tol
            if lo > 0:
                fail("tolerance", f"{name}: the lower deviation must be 0 or negative: write "
                     f"[{-lo:g}, {hi:g}], not [{lo:g}, {hi:g}]")
            if hi < 0:
                fail("tolerance", f"{name}: the upper deviation must be 0 or positive: write "
                     f"[{lo:g}, {-hi:g}], not [{lo:g}, {hi:g}]")
            if hi - lo <= 0:
                fail("tolerance", f"{name}: the deviations [{lo:g}, {hi:g}] leave no room; widen them")
            low, high, text = t + lo, t + hi, f"{_fmt(t)} {_fmt(lo)}/+{_fmt(hi)}{u}"
        else:
            fail("tolerance", f"{name}: tolerance must be a number above 0 (±) or a pair [lower <= 0, upper >= 0], "
                 f"not {tol!r}")
    elif has_range:
        low = float(body.get("min", -math.inf))
        high = float(body.get("max", math.inf))
        if low > high:
            fail("min", f"{name}: min {low:g} is above max {high:g}; swap them")
        if low == high:
            fail("min", f"{name}: min equals max ({low:g}); no measurement can be inside a range of zero "
                 "width, give a tolerance")
        if math.isinf(high):
            text = f"≥ {_fmt(low)}{u}"
        elif math.isinf(low):
            text = f"≤ {_fmt(high)}{u}"
        else:
            text = f"{_fmt(low)} … {_fmt(high)}{u}"
    else:
        fail(None, f"{name}: give a limit: min and/or max, or target and tolerance")
    return Limit(figure=name, low=low, high=high, unit=unit, text=text, line=line_of(None), note=note)
