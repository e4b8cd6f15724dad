"""Options: ``[tool.samebits]`` in pyproject.toml or a samebits.toml, merged with the command line.

Keys (TOML, dashes or underscores):
  rules        list of rule names to run (default: all)         e.g. ["chain"]
  line-length  free-form line limit, 132 by default (the standard's); 0 means no limit
  exclude      glob patterns of paths to skip when walking directories
  module-path  directories searched for the modules that a file USEs (relative to the config
               file); the directories of the given files are always searched
  jobs         processes for a run over many files (default 0: one per core; 1: no workers)
  audit        which audit checks run (default all): "libm", "blas", "fma", "build"
  guard-functions  further functions whose real results get a signed-zero guard, by the name
               the code calls them (Fortran: "my_min"; Python: "np.nanmin" or "nanmin")
"""
from __future__ import annotations

import fnmatch
import json
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ALL_RULES = ("chain", "power", "sum", "zero", "audit")
AUDIT_CHECKS = ("libm", "blas", "fma", "build")


class ConfigError(ValueError):
    pass


@dataclass(frozen=True)
class Options:
    rules: tuple[str, ...] = ALL_RULES
    line_length: int = 132
    exclude: tuple[str, ...] = field(default=())
    effects: tuple[str, ...] = ("bit-for-bit", "answer-changing")  # which edits to propose
    module_path: tuple[str, ...] = field(default=())
    power_threshold: int = 8  # larger integer exponents are reported, not expanded
    fractional_powers: bool = False  # rewrite x**0.5, x**1.5 to sqrt forms
    chain_order: str = "written"  # written | balanced | accurate
    chain_order_files: tuple[tuple[str, str], ...] = ()  # (glob, order) per file, first match wins
    samples: dict = field(default_factory=dict)  # operand text -> {"samples": [...]} or {"range": [lo, hi]}
    samples_file: str = ""
    guard_functions: tuple[str, ...] = ()  # further functions whose real results get a +0.0 guard
    audit_checks: tuple[str, ...] = AUDIT_CHECKS  # which findings the audit rule gives
    jobs: int = 0  # processes for a run over many files; 0: one per core

    def for_path(self, path: str) -> "Options":
        """The options for one file: a per-file chain order replaces the run's."""
        for pattern, order in self.chain_order_files:
            if fnmatch.fnmatch(path, pattern) or fnmatch.fnmatch(Path(path).as_posix(), "*/" + pattern) \
                    or fnmatch.fnmatch(Path(path).name, pattern):
                return replace(self, chain_order=order)
        return self
    source: str = ""  # where the options were read from, for messages

    def excluded(self, path: str) -> bool:
        return any(fnmatch.fnmatch(path, pattern) or fnmatch.fnmatch(Path(path).name, pattern)
                   for pattern in self.exclude)


DEFAULT = Options()


def _table(path: Path) -> dict | None:
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as error:
        raise ConfigError(f"{path}: cannot read: {error}") from error
    except tomllib.TOMLDecodeError as error:
        raise ConfigError(f"{path}: {error}") from error
    if path.name == "pyproject.toml":
        return data.get("tool", {}).get("samebits")
    return data


def find_config(start: Path) -> Path | None:
    """The nearest samebits.toml, or pyproject.toml with a [tool.samebits] table."""
    directory = start.resolve()
    if directory.is_file():
        directory = directory.parent
    for candidate in [directory, *directory.parents]:
        own = candidate / "samebits.toml"
        if own.is_file():
            return own
        project = candidate / "pyproject.toml"
        if project.is_file() and _table(project) is not None:
            return project
    return None


def from_table(table: dict, source: str = "") -> Options:
    values = {key.replace("-", "_"): value for key, value in table.items()}
    known = {"rules", "line_length", "exclude", "module_path", "power_threshold", "fractional_powers",
             "chain_order", "chain_order_files", "samples", "guard_functions", "audit", "jobs"}
    unknown = sorted(set(values) - known)
    if unknown:
        raise ConfigError(f"{source}: unknown option(s): {', '.join(unknown)}")
    options = Options(source=source)
    if "rules" in values:
        rules = tuple(values["rules"])
        bad = [r for r in rules if r not in ALL_RULES]
        if bad:
            raise ConfigError(f"{source}: unknown rule(s): {', '.join(bad)}; known: {', '.join(ALL_RULES)}")
        options = replace(options, rules=rules)
    if "line_length" in values:
        length = values["line_length"]
        if not isinstance(length, int) or length < 0:
            raise ConfigError(f"{source}: line-length must be a whole number >= 0")
        options = replace(options, line_length=length)
    if "exclude" in values:
        options = replace(options, exclude=tuple(str(p) for p in values["exclude"]))
    if "power_threshold" in values:
        threshold = values["power_threshold"]
        if not isinstance(threshold, int) or not 2 <= threshold <= 64:
            raise ConfigError(f"{source}: power-threshold must be a whole number from 2 to 64")
        options = replace(options, power_threshold=threshold)
    if "fractional_powers" in values:
        if not isinstance(values["fractional_powers"], bool):
            raise ConfigError(f"{source}: fractional-powers must be true or false")
        options = replace(options, fractional_powers=values["fractional_powers"])
    if "chain_order" in values:
        options = replace(options, chain_order=_order(values["chain_order"], source))
    if "chain_order_files" in values:
        table = values["chain_order_files"]
        if not isinstance(table, dict):
            raise ConfigError(f"{source}: chain-order-files must be a table of glob = order")
        options = replace(options, chain_order_files=tuple((str(k), _order(v, source)) for k, v in table.items()))
    if "samples" in values:
        base = Path(source).parent if source else Path.cwd()
        options = with_samples(options, base / str(values["samples"]))
    if "jobs" in values:
        jobs = values["jobs"]
        if not isinstance(jobs, int) or isinstance(jobs, bool) or jobs < 0:
            raise ConfigError(f"{source}: jobs must be a whole number >= 0 (0: one per core)")
        options = replace(options, jobs=jobs)
    if "audit" in values:
        checks = values["audit"]
        if not isinstance(checks, list) or any(c not in AUDIT_CHECKS for c in checks):
            raise ConfigError(f"{source}: audit must be a list of checks from {', '.join(AUDIT_CHECKS)}")
        options = replace(options, audit_checks=tuple(checks))
    if "guard_functions" in values:
        names = values["guard_functions"]
        if not isinstance(names, list) or not all(isinstance(n, str) and n.strip() for n in names):
            raise ConfigError(f"{source}: guard-functions must be a list of function names")
        options = replace(options, guard_functions=tuple(n.strip() for n in names))
    if "module_path" in values:
        base = Path(source).parent if source else Path.cwd()
        options = replace(options, module_path=tuple(str(base / p) for p in values["module_path"]))
    return options


CHAIN_ORDERS = ("written", "balanced", "accurate")


def _order(value, source: str) -> str:
    if value not in CHAIN_ORDERS:
        raise ConfigError(f"{source}: chain order must be one of {', '.join(CHAIN_ORDERS)}, not {value!r}")
    return value


def with_samples(options: Options, path: Path) -> Options:
    """Options with value samples read from a JSON file (format in docs/usage.md)."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as error:
        raise ConfigError(f"{path}: cannot read value samples: {error}") from error
    variables = data.get("variables") if isinstance(data, dict) else None
    if not isinstance(variables, dict):
        raise ConfigError(f"{path}: expected an object with a \"variables\" object")
    samples = {}
    for name, entry in variables.items():
        key = "".join(str(name).lower().split())
        if isinstance(entry, dict) and isinstance(entry.get("samples"), list) and entry["samples"]:
            samples[key] = {"samples": [float(v) for v in entry["samples"]]}
        elif isinstance(entry, dict) and isinstance(entry.get("range"), list) and len(entry["range"]) == 2:
            samples[key] = {"range": [float(v) for v in entry["range"]]}
        else:
            raise ConfigError(f"{path}: variable {name!r} needs \"samples\": [...] or \"range\": [low, high]")
    return replace(options, samples=samples, samples_file=str(path))


def load(start: Path, config_path: Path | None = None) -> Options:
    path = config_path or find_config(start)
    if path is None:
        return DEFAULT
    table = _table(path)
    return from_table(table or {}, str(path))
