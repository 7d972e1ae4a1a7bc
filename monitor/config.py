"""The workspace configuration (``levelfield.toml``): a schema of options, each with its
default and help, validated all at once so the user sees every problem in one go.

:data:`OPTIONS` is the only schema: the commented default file, the validation of
``levelfield.toml``, the settings table of the methods page and the typed sections the library
reads (``config.measures`` is a :class:`MeasureSettings`, ``config.pool`` a :class:`PoolSettings`,
...) are all built from it.

The ``[parties.a]`` / ``[parties.b]`` tables are a fixed contract (other tools write them):
``name``, ``labels`` and ``colour``.
"""

from __future__ import annotations

import copy
import difflib
import re
import tomllib
from dataclasses import dataclass, field, make_dataclass
from pathlib import Path
from typing import Any, Callable

from monitor.config_checks import (_base_url, _colour, _expected_counts, _labels, _staggered_classes, _state_names,
                                    _typed)
from monitor.errors import ConfigError


@dataclass(frozen=True)
class Option:
    """One option: ``help`` is written into levelfield.toml and shown on the methods page;
    ``note`` (sources, project choices) goes into the typed section's documentation only."""

    section: str
    key: str
    default: Any
    help: str
    check: Callable[[Any], str | None] = field(default=lambda v: None, compare=False)
    note: str = ""
    #: a table option (any keys below it): lines shown commented out in the default levelfield.toml
    example: tuple[str, ...] = ()

    @property
    def name(self) -> str:
        """``section.key``; a whole-section table (``key`` empty, such as ``[states]``) is its section."""
        return f"{self.section}.{self.key}" if self.key else self.section


OPTIONS: list[Option] = [
    Option("parties.a", "name", "Party A", "display name of major party a", _typed(str)),
    Option("parties.a", "labels", ["A"], "labels in native files that mean party a", _labels),
    Option("parties.a", "colour", "#1b7f79", "chart colour of party a", _colour),
    Option("parties.b", "name", "Party B", "display name of major party b", _typed(str)),
    Option("parties.b", "labels", ["B"], "labels in native files that mean party b", _labels),
    Option("parties.b", "colour", "#c9861a", "chart colour of party b", _colour),
    Option(
        "uncontested", "policy", "impute",
        "how contests with one major party absent enter the measures: impute | exclude | none",
        _typed(str, choices=("impute", "exclude", "none")),
    ),
    Option(
        "uncontested", "winner_share", 0.75,
        "two-party share given to the winner of an uncontested contest under policy = impute",
        _typed(float, low=0.5, high=1.0),
    ),
    Option(
        "measures", "competitive_window", 0.05,
        "a district is competitive when |share - 0.5| is at most this (common practice)",
        _typed(float, low=0.0, high=0.5),
    ),
    Option(
        "measures", "lopsided_variant", "welch", "t-test of the lopsided-margins test: welch | pooled",
        _typed(str, choices=("welch", "pooled")),
        note="Welch (unequal variances) or pooled (Student). Which one Wang (2016) used is not verified; "
             "pages must name the variant.",
    ),
    Option(
        "measures", "symmetry_band", 0.05,
        "symmetry_bias averages [S(v) - (1 - S(1 - v))] / 2 over 0.5 +- this band: the halved form of "
        "Gelman & King (1994, from memory), not the undivided difference, so that it equals partisan_bias "
        "as the band shrinks to 0 (the undivided average would be twice the value)",
        _typed(float, low=0.0, high=0.5),
    ),
    Option(
        "measures", "interval_draws", 1000, "simulated elections behind each 95% interval (0: no intervals)",
        _typed(int, low=0, high=1_000_000),
        note="Rounded up to even (antithetic pairs).",
    ),
    Option(
        "measures", "noise_sd", 0.03,
        "SD of the district-level two-party share noise used for intervals",
        _typed(float, low=0.0, high=0.5),
        note="Gelman & King (1994)-style hypothetical elections; the value is a project choice, not an estimate.",
    ),
    Option(
        "measures", "interval_level", 0.95, "coverage of the simulation intervals",
        _typed(float, above=0.0, below=1.0),
    ),
    Option("measures", "seed", 20240101, "random seed of the interval simulations", _typed(int, low=0)),
    Option(
        "measures", "responsiveness_h", 0.05,
        "responsiveness is [S(V+h) - S(V-h)] / 2h at the observed statewide vote V",
        _typed(float, low=0.001, high=0.5),
        note="Project choice: S is a step function, so h must be wide enough to hold some districts for small "
             "delegations; 5 points matches the competitive window (responsiveness is then the share of "
             "districts within 5 points of 50%, divided by 0.1).",
    ),
    Option(
        "measures", "swing_reference", "vote_weighted",
        "uniform swing shifts every district from the statewide vote-weighted share (vote_weighted) or from "
        "the unweighted mean district share (district_mean)",
        _typed(str, choices=("vote_weighted", "district_mean")),
    ),
    Option(
        "measures", "min_districts", 2,
        "the asymmetry measures need at least this many districts (the descriptive counts do not)",
        _typed(int, low=1, high=1_000_000),
        note="Project choice. Not the same as flags.min_districts, below which a unit is never flagged.",
    ),
    Option(
        "pool", "tolerance", 0.005,
        "a simulated delegation counts when its statewide share is within this of the state's",
        _typed(float, low=0.0001, high=0.1),
    ),
    Option(
        "pool", "draws", 2_000,
        "accepted simulated delegations per unit (national-pool null); the Monte Carlo error of a "
        "2.5% tail percentile is about sqrt(0.025 * 0.975 / draws), 0.0035 at 2,000",
        _typed(int, low=100, high=10_000_000),
    ),
    Option(
        "pool", "exclude_own_state", True, "leave the state's own districts out of its pool",
        _typed(bool),
    ),
    Option("pool", "seed", 19720101, "random seed of the national-pool simulation", _typed(int, low=0)),
    Option(
        "flags", "tail", 0.025,
        "a measure is flagged when it lies in this outer tail of its null, on either side (default 2.5% "
        "each side, a two-sided 5% test: common practice; no source proposes it for these measures)",
        _typed(float, low=0.0001, high=0.25),
    ),
    Option(
        "flags", "p_threshold", 0.05,
        "the lopsided-margins t-test and the mean-median z-test flag below this p (default 0.05: common "
        "practice, the conventional significance level)",
        _typed(float, low=0.0001, high=0.5),
    ),
    Option(
        "flags", "min_districts", 6,
        "units with fewer districts are never flagged (default 6: project choice; the literature skips "
        "very small delegations but no verified cut-off was found)",
        _typed(int, low=2, high=10_000),
    ),
    Option(
        "flags", "min_coverage", 0.9,
        "units whose measures cover less than this share of their seats are never flagged, and say why "
        "(default 0.9: project choice; no verified source)",
        _typed(float, low=0.0, high=1.0),
    ),
    Option(
        "flags", "watch_cycles", 2, "a plan goes on watch when this many of its cycles are flagged ...",
        _typed(int, low=1, high=100),
    ),
    Option(
        "flags", "watch_measures", 2, "... each by at least this many measures agreeing in direction",
        _typed(int, low=1, high=10),
    ),
    Option(
        "coverage", "expected", {},
        "districts (and seats) each state's chamber should have, used when neither the plans file nor an "
        "earlier cycle of the same plan says: expected.<chamber>.<STATE> = N (N single-member districts) or "
        "= { districts = N, seats = M }",
        _expected_counts,
        example=('expected.federal.QV = 12', 'expected.state_lower.QV = { districts = 40, seats = 60 }'),
    ),
    Option(
        "multi_member", "treatment", "leave_out",
        "how a contest electing several members (block voting) enters the district-share measures: leave_out "
        "(left out, said in the coverage) | pseudo_districts (each seat a pseudo-district with the mean vote of "
        "each party's winning and losing candidates, seats as actually won: project choice, no verified source; "
        "stored with every number as part of the policy)",
        _typed(str, choices=("leave_out", "pseudo_districts")),
    ),
    Option(
        "staggered", "classes", {},
        "chambers elected in classes (a staggered senate: each cycle elects part of it): classes.<chamber> = N "
        "for every state, or = { <STATE> = N, \"*\" = N } per state (1 = not staggered). Each cycle's unit of "
        "such a chamber is partial and never flagged; the measures and flags of the whole chamber are those of "
        "its whole-chamber unit, which combines the latest election of every seat over the last N cycles of the "
        "same plan (project choice; chamber code <chamber>_whole in the downloads and the CLI)",
        _staggered_classes,
        example=('classes.state_upper = 2', 'classes.state_upper = { QV = 2, ZX = 1 }'),
    ),
    Option(
        "load", "max_votes_per_row", 50_000_000,
        "a vote count above this is refused as implausible",
        _typed(int, low=1),
    ),
    Option(
        "load", "max_decompressed_mb", 512,
        "a gzipped file that decompresses beyond this many MB is refused",
        _typed(int, low=1),
    ),
    Option(
        "schedule", "poll_seconds", 60, "how often the watcher polls the inbox",
        _typed(int, low=1, high=86_400),
    ),
    Option(
        "schedule", "nightly", "03:00", "local time (HH:MM) of the nightly full verification",
        lambda v: None if isinstance(v, str) and re.match(r"^([01]\d|2[0-3]):[0-5]\d$", v)
        else f'must be a time like "03:00", got {v!r}',
    ),
    Option(
        "site", "base_url", "",
        "absolute address the published site is served from, e.g. \"https://example.org/watch/\"; the Atom "
        "feed's links are then absolute, so feed readers can follow them; when empty they are relative to "
        "the feed and publish warns (the pages' own links are always relative)",
        _base_url,
    ),
    Option(
        "states", "", {},
        "state names shown on the pages beside their codes: CODE = \"name\" (codes as in the results, upper "
        "case; a state without a name is shown by its code)",
        _state_names,
        example=('QV = "Quillan Vale"',),
    ),
]

_BY_NAME = {opt.name: opt for opt in OPTIONS}
SECTIONS = list(dict.fromkeys(opt.section for opt in OPTIONS))


class SettingsError(ValueError):
    """Invalid values given to a typed section in code (levelfield.toml problems are ConfigErrors)."""


def section_options(section: str) -> list[Option]:
    """The options of one section, in schema order."""
    return [opt for opt in OPTIONS if opt.section == section]


def _validate_section(self) -> None:
    """``__post_init__`` of a typed section: check every value with its option, report all at once."""
    problems = []
    for opt in section_options(self.SECTION):
        value = getattr(self, opt.key)
        message = opt.check(value)
        if message:
            problems.append(f"{opt.key} {message}")
        elif isinstance(opt.default, float) and isinstance(value, int) and not isinstance(value, bool):
            object.__setattr__(self, opt.key, float(value))
    if problems:
        raise SettingsError(f"invalid {self.SECTION} settings: " + "; ".join(problems))


def section_type(section: str, name: str, summary: str) -> type:
    """A frozen dataclass with one field per option of ``section`` (default, type and validation
    from :data:`OPTIONS`; its docstring lists each option's help and note)."""
    options = section_options(section)
    doc = [summary, "", "Built from ``config.OPTIONS``; invalid values raise one :class:`SettingsError` naming all.",
           ""]
    for opt in options:
        doc.append(f"``{opt.key}`` (default {opt.default!r}): {opt.help}." + (f" {opt.note}" if opt.note else ""))
    fields_ = [(opt.key, type(opt.default),
                field(default_factory=lambda d=opt.default: copy.deepcopy(d)) if isinstance(opt.default, (dict, list))
                else field(default=opt.default)) for opt in options]
    return make_dataclass(name, fields_, frozen=True, namespace={
        "SECTION": section, "__doc__": "\n".join(doc), "__post_init__": _validate_section,
        "__module__": __name__})


MeasureSettings = section_type("measures", "MeasureSettings", "How the measures engine computes the measures.")
PoolSettings = section_type("pool", "PoolSettings", "How the national pool is simulated.")
FlagSettings = section_type("flags", "FlagSettings", "When a unit is flagged and a plan put on watch.")
UncontestedSettings = section_type("uncontested", "UncontestedSettings", "How uncontested contests enter the measures.")
LoadSettings = section_type("load", "LoadSettings", "Limits of the loader.")
ScheduleSettings = section_type("schedule", "ScheduleSettings", "When the watcher runs its jobs.")
SiteSettings = section_type("site", "SiteSettings", "How the site is published.")
CoverageSettings = section_type("coverage", "CoverageSettings", "What each unit's coverage is measured against.")
MultiMemberSettings = section_type("multi_member", "MultiMemberSettings",
                                   "How multi-member contests enter the district-share measures.")
StaggeredSettings = section_type("staggered", "StaggeredSettings", "Which chambers are elected in classes.")

#: the typed sections, by the name of the section they are built from
SECTION_TYPES: dict[str, type] = {cls.SECTION: cls for cls in (
    MeasureSettings, PoolSettings, FlagSettings, UncontestedSettings, LoadSettings, ScheduleSettings, SiteSettings,
    CoverageSettings, MultiMemberSettings, StaggeredSettings)}


@dataclass(frozen=True)
class Party:
    code: str
    name: str
    labels: tuple[str, ...]
    colour: str


class Config:
    """Validated configuration: ``config["uncontested.policy"]`` or the typed helpers."""

    def __init__(self, values: dict[str, Any], path: Path | None = None):
        self._values = values
        self.path = path

    def __getitem__(self, name: str) -> Any:
        return self._values[name]

    def section(self, name: str):
        """The typed section ``name`` (one of :data:`SECTION_TYPES`) with this configuration's values."""
        cls = SECTION_TYPES[name]
        return cls(**{opt.key: self._values[opt.name] for opt in section_options(name)})

    @property
    def measures(self) -> "MeasureSettings":
        return self.section("measures")

    @property
    def pool(self) -> "PoolSettings":
        return self.section("pool")

    @property
    def flags(self) -> "FlagSettings":
        return self.section("flags")

    def party(self, code: str) -> Party:
        return Party(
            code,
            self[f"parties.{code}.name"],
            tuple(self[f"parties.{code}.labels"]),
            self[f"parties.{code}.colour"],
        )

    def state_names(self) -> dict[str, str]:
        """State code (upper case, as stored) -> name, from the ``[states]`` table."""
        return {code.upper(): name.strip() for code, name in self["states"].items()}

    def label_codes(self) -> dict[str, str]:
        """Map each configured label (case-folded, trimmed) to its party code."""
        out = {}
        for code in ("a", "b"):
            for label in self[f"parties.{code}.labels"]:
                out[normalise_label(label)] = code
        return out

    @property
    def policy(self) -> str:
        """The policy as stored with every measure: the uncontested policy, e.g. ``impute:0.75``,
        then the multi-member treatment when it is not the default
        (``impute:0.75+multi_member:pseudo_districts``)."""
        from monitor.multi_member import policy_suffix

        policy = self["uncontested.policy"]
        if policy == "impute":
            policy = f"impute:{self['uncontested.winner_share']:g}"
        return policy + policy_suffix(self["multi_member.treatment"])


def normalise_label(label: str) -> str:
    return " ".join(label.split()).casefold()


def load_config(path: Path | None) -> Config:
    """Read ``path`` (missing file = all defaults), validate everything, raise once."""
    raw: dict[str, Any] = {}
    if path is not None and path.exists():
        try:
            raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(f"{path}: not valid TOML: {exc}") from None
        except UnicodeDecodeError as exc:
            raise ConfigError(f"{path}: not valid UTF-8 ({exc.reason} at byte {exc.start})") from None
    values = {opt.name: opt.default for opt in OPTIONS}
    problems: list[str] = []
    for name, value in _flatten(raw):
        opt = _BY_NAME.get(name)
        if opt is None:
            hint = difflib.get_close_matches(name, list(_BY_NAME), n=1)
            problems.append(f"unknown option {name!r}" + (f" (did you mean {hint[0]!r}?)" if hint else ""))
            continue
        message = opt.check(value)
        if message:
            problems.append(f"{name} {message}")
            continue
        values[name] = float(value) if isinstance(opt.default, float) else value
    overlap = {normalise_label(x) for x in values["parties.a.labels"]} & {
        normalise_label(x) for x in values["parties.b.labels"]
    }
    if overlap:
        problems.append(f"labels {sorted(overlap)} are listed for both parties.a and parties.b")
    if problems:
        where = str(path) if path else "configuration"
        raise ConfigError(f"{where}: " + "; ".join(problems))
    return Config(values, path)


def _flatten(table: dict[str, Any], prefix: str = ""):
    for key, value in table.items():
        name = f"{prefix}.{key}" if prefix else key
        opt = _BY_NAME.get(name)
        if isinstance(value, dict) and not (opt is not None and isinstance(opt.default, dict)):
            yield from _flatten(value, name)
        else:
            yield name, value


def default_toml() -> str:
    """The commented default ``levelfield.toml`` written by ``levelfield init``."""
    lines = [
        "# levelfield workspace configuration.",
        "# Every option is shown with its default; delete a line to go back to the default.",
        "# The [parties.a] and [parties.b] tables are read by other tools too: keep their keys.",
        "# Signed measures are positive when they favour party a.",
    ]
    for section in SECTIONS:
        lines.append("")
        lines.append(f"[{section}]")
        for opt in (o for o in OPTIONS if o.section == section):
            lines.append(f"# {opt.help}")
            if opt.example:  # a table: empty by default, its keys shown as examples to uncomment
                lines.extend(f"# {line}" for line in opt.example)
                continue
            lines.append(f"{opt.key} = {_toml_value(opt.default)}")
    return "\n".join(lines) + "\n"


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return repr(value)
