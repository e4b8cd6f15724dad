#!/usr/bin/env python3
"""Time ``samebits check DIR`` on a generated Python corpus against a bare libcst parse of it.

Usage::

    python benchmarks/bench_python_check.py [--lines 20000] [--repeat 3]
        [--samebits CMD] [--only-parse] [--keep PATH] [--seed N] [--kernel-share F]

The script writes a deterministic corpus of about ``--lines`` lines of Python into a
temporary folder (into PATH instead with ``--keep``), as files of 100 to 400 lines in a
few sub-packages of an invented sea-ice model. Most files have nothing to change: classes
and dataclasses, argument parsing, file and JSON I/O, string handling (f-strings, string
concatenation with literals), dict and list manipulation, integer loops, logging, type
hints. The others (``--kernel-share``, default 0.12) also hold numpy kernels with
candidates: float chains of three operands or more, powers, ``np.sum``, ``arr.sum()``,
``np.mean``, ``np.exp``, ``min``/``max`` on floats. Every file is checked with ``ast.parse``
and every file meant to be clean is checked to hold no candidate, before anything is timed.

Then it runs, each ``--repeat`` times as a subprocess and alternating between them:

1. ``CMD check DIR`` (default CMD: ``samebits``); exit status 0 and 1 both count as success
   (1 means "there are proposals"), 2 is an error: its stderr is shown and the benchmark
   stops. By default samebits uses every core;
2. ``CMD check --jobs 1 DIR``, the same in one process, printed beside it for comparison;
3. ``python -c`` that imports libcst, walks DIR and calls ``libcst.parse_module`` on the
   text of every ``.py`` file; it must exit 0.

Both times therefore include interpreter start-up and imports. It prints the median wall
time of each and their ratio; issue 5 asks for a ratio of 0.5 or less, which the fast
``ast`` pre-scan makes possible by sending only the files with candidates to libcst.
Exit status: 0 when everything asked for ran, 1 when a run failed, 2 when the samebits
command was not found.
"""
from __future__ import annotations

import argparse
import ast
import os
import random
import re
import shlex
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path
from string import Template

from timing import time_once

TARGET_RATIO = 0.5  # issue 5: thanks to the pre-scan, checking costs at most half a bare parse
MIN_FILE_LINES = 100
MAX_FILE_LINES = 400

PARSE_SNIPPET = """\
import os
import sys
import libcst
count = 0
for root, dirs, names in os.walk(sys.argv[1]):
    dirs.sort()
    for name in sorted(names):
        if name.endswith(".py"):
            with open(os.path.join(root, name), encoding="utf-8") as handle:
                libcst.parse_module(handle.read())
            count += 1
if count == 0:
    sys.exit("no .py file found")
"""


# --------------------------------------------------------------------------- clean-file check
# Our own conservative idea of a candidate, used only to make sure that the files meant to have
# nothing to change really have nothing: any power or matrix product, any chain of three or more
# operands of one precedence level (+ - or * /) without a string piece in it, any call of a
# numeric function name, any use of numpy or math.
NUMERIC_CALLS = frozenset("""sum fsum mean average median std var min max minimum maximum fmin fmax amin
amax nanmin nanmax nansum nanmean prod cumsum cumprod reduce dot vdot inner outer matmul einsum
tensordot sqrt cbrt exp exp2 expm1 log log2 log10 log1p sin cos tan asin acos atan atan2 arcsin
arccos arctan arctan2 sinh cosh tanh asinh acosh atanh arcsinh arccosh arctanh hypot erf erfc
gamma lgamma pow power float_power solve inv lstsq norm trapz trapezoid""".split())
_LEVEL = {ast.Add: 1, ast.Sub: 1, ast.Mult: 2, ast.Div: 2}


def _level(node: ast.AST) -> int:
    return _LEVEL.get(type(node.op), 0) if isinstance(node, ast.BinOp) else 0


def _string_piece(node: ast.AST) -> bool:
    return isinstance(node, ast.JoinedStr) or (isinstance(node, ast.Constant)
                                               and isinstance(node.value, (str, bytes)))


def candidate_reasons(tree: ast.AST) -> list[str]:
    """Why a parsed file could hold something to rewrite (empty list: nothing)."""
    reasons: list[str] = []
    for node in ast.walk(tree):
        where = f"line {getattr(node, 'lineno', '?')}"
        if isinstance(node, ast.BinOp):
            if isinstance(node.op, (ast.Pow, ast.MatMult)):
                reasons.append(f"{where}: power or matrix product")
                continue
            level = _level(node)
            if level and _level(node.left) == level:
                operands, current = [node.right], node.left
                while _level(current) == level:
                    operands.append(current.right)
                    current = current.left
                operands.append(current)
                if not any(_string_piece(op) for op in operands):
                    reasons.append(f"{where}: chain of {len(operands)} operands")
        elif isinstance(node, ast.Call):
            func = node.func
            name = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", None)
            if name in NUMERIC_CALLS:
                reasons.append(f"{where}: call of {name}")
        elif isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) \
                and node.value.id in ("np", "numpy", "math"):
            reasons.append(f"{where}: use of {node.value.id}.{node.attr}")
    return reasons


# --------------------------------------------------------------------------- generator
PACKAGE = "floeworks"
SUBPACKAGES = ["io", "cli", "stations", "reports", "grid", "physics", "tracks", "config"]
NOUNS = ["floe", "ridge", "lead", "pond", "brine", "snowpack", "buoy", "crack", "drift", "keel",
         "shelf", "band", "layer", "segment", "track", "station", "polynya", "hummock"]
VERBS = ["merge", "export", "import", "summarise", "validate", "index", "archive", "render",
         "collect", "split", "relabel", "inspect"]
FIELDS = ["label", "station_id", "layer_count", "track_name", "depth_index", "status", "owner",
          "region_code", "cycle", "batch"]

HEADER = Template('''\
"""$doc

Part of $package, an invented sea-ice model; generated for a benchmark, not real code.
"""
from __future__ import annotations

import argparse
import json
import logging
from collections import defaultdict
from dataclasses import dataclass, field
from enum import Enum
from pathlib import Path
from typing import Iterable, Iterator
$extra
LOG = logging.getLogger(__name__)
DEFAULT_SUFFIX = ".txt"
$const = $int1
''')

# Blocks with nothing to change. ``$`` placeholders are filled by string.Template, so the
# braces of the generated f-strings and dicts stay as written.
CLEAN_BLOCKS = [
    Template('''\


@dataclass
class ${Cls}Config:
    """Settings of the $noun $verb step."""

    name: str = "$noun"
    station_id: int = $int1
    layer_count: int = $int2
    output_dir: Path = Path("out")
    tags: list[str] = field(default_factory=list)
    enabled: bool = True

    def __post_init__(self) -> None:
        if self.layer_count < 1:
            raise ValueError(f"layer_count must be positive, got {self.layer_count}")
        if not self.name:
            raise ValueError("name must not be empty")
        self.tags = [tag.strip().lower() for tag in self.tags if tag.strip()]

    def output_path(self, step: int) -> Path:
        return self.output_dir / ("${noun}_" + self.name + f"_{step:05d}" + DEFAULT_SUFFIX)

    def to_dict(self) -> dict[str, object]:
        return {
            "name": self.name,
            "station_id": self.station_id,
            "layer_count": self.layer_count,
            "output_dir": str(self.output_dir),
            "tags": list(self.tags),
            "enabled": self.enabled,
        }

    @classmethod
    def from_dict(cls, data: dict[str, object]) -> "${Cls}Config":
        known = {key: value for key, value in data.items() if key in cls.__dataclass_fields__}
        if "output_dir" in known:
            known["output_dir"] = Path(str(known["output_dir"]))
        return cls(**known)
'''),
    Template('''\


def build_${verb}_${noun}_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="$package-$verb",
        description="$Verb $noun records of the $package model.",
    )
    parser.add_argument("inputs", nargs="+", type=Path, help="$noun files to read")
    parser.add_argument("--output", "-o", type=Path, default=Path("${noun}_${verb}.txt"))
    parser.add_argument("--station", type=int, default=$int1, help="station number")
    parser.add_argument("--verbose", "-v", action="count", default=0)
    parser.add_argument("--format", choices=("text", "json", "csv"), default="text")
    parser.add_argument("--dry-run", action="store_true", help="only list what would be written")
    return parser


def main_${verb}_${noun}(argv: list[str] | None = None) -> int:
    args = build_${verb}_${noun}_parser().parse_args(argv)
    level = logging.WARNING - 10 * args.verbose
    logging.basicConfig(level=level if level > logging.DEBUG else logging.DEBUG)
    missing = [path for path in args.inputs if not path.exists()]
    if missing:
        for path in missing:
            LOG.error("no such $noun file: %s", path)
        return 2
    if args.dry_run:
        for path in args.inputs:
            print(f"would read {path} and write {args.output} ({args.format})")
        return 0
    rows: list[dict[str, str]] = []
    for path in args.inputs:
        rows.extend(read_${noun}_table(path))
    LOG.info("read %d $noun rows from %d files", len(rows), len(args.inputs))
    write_${noun}_rows(args.output, rows, args.format)
    return 0
'''),
    Template('''\


def read_${noun}_table(path: Path, separator: str = ";") -> list[dict[str, str]]:
    """Rows of a $noun table: a header line, then one record per line; '#' starts a comment."""
    rows: list[dict[str, str]] = []
    with open(path, encoding="utf-8") as handle:
        header: list[str] | None = None
        for number, line in enumerate(handle, start=1):
            line = line.split("#", 1)[0].strip()
            if not line:
                continue
            cells = [cell.strip() for cell in line.split(separator)]
            if header is None:
                header = [cell.lower().replace(" ", "_") for cell in cells]
                continue
            if len(cells) != len(header):
                LOG.warning("%s:%d: expected %d cells, found %d", path, number, len(header), len(cells))
                continue
            rows.append(dict(zip(header, cells)))
    if header is None:
        LOG.warning("%s: empty $noun table", path)
    return rows


def write_${noun}_rows(path: Path, rows: list[dict[str, str]], style: str = "text") -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    if style == "json":
        path.write_text(json.dumps(rows, indent=2, sort_keys=True) + "\\n", encoding="utf-8")
        return
    columns = sorted({key for row in rows for key in row})
    separator = ";" if style == "csv" else " | "
    with open(path, "w", encoding="utf-8") as handle:
        handle.write(separator.join(columns) + "\\n")
        for row in rows:
            handle.write(separator.join(row.get(column, "") for column in columns) + "\\n")
    LOG.debug("wrote %d rows to %s", len(rows), path)
'''),
    Template('''\


def format_${noun}_report(title: str, rows: list[dict[str, str]], width: int = $width) -> str:
    """A plain-text report of $noun rows, one line per row."""
    rule = "=" * width
    lines = [rule, title.center(width), rule]
    if not rows:
        lines.append("(no $noun rows)")
        return "\\n".join(lines) + "\\n"
    keys = sorted(rows[0])
    lines.append(" ".join(f"{key:>12}" for key in keys))
    lines.append("-" * width)
    for index, row in enumerate(rows, start=1):
        cells = " ".join(f"{row.get(key, ''):>12}" for key in keys)
        lines.append(f"{index:4d} {cells}")
    lines.append(rule)
    lines.append("report for " + title + ": " + str(len(rows)) + " rows")
    return "\\n".join(lines) + "\\n"


def ${noun}_file_name(station: int, cycle: int, kind: str = "$verb") -> str:
    if station < 0:
        raise ValueError(f"bad station number {station}")
    return "$noun" + "_" + kind + f"_{station:04d}_c{cycle:03d}" + DEFAULT_SUFFIX
'''),
    Template('''\


def group_${noun}_rows(rows: Iterable[dict[str, str]], key: str = "$field") -> dict[str, list[dict[str, str]]]:
    groups: dict[str, list[dict[str, str]]] = defaultdict(list)
    for row in rows:
        groups[row.get(key, "unknown")].append(row)
    return dict(sorted(groups.items()))


def merge_${noun}_tables(*tables: dict[str, dict[str, str]]) -> dict[str, dict[str, str]]:
    merged: dict[str, dict[str, str]] = {}
    for table in tables:
        for name, record in table.items():
            target = merged.setdefault(name, {})
            for column, value in record.items():
                if value and column not in target:
                    target[column] = value
    return merged


def ${noun}_labels(rows: list[dict[str, str]]) -> list[str]:
    seen: set[str] = set()
    labels = []
    for row in rows:
        label = row.get("label", "").strip()
        if label and label not in seen:
            seen.add(label)
            labels.append(label)
    return sorted(labels, key=lambda text: (len(text), text))


def invert_${noun}_index(index: dict[str, list[str]]) -> dict[str, str]:
    return {member: owner for owner, members in index.items() for member in members}
'''),
    Template('''\


def ${noun}_batches(items: list[str], size: int = $int2) -> Iterator[list[str]]:
    """Consecutive batches of at most ``size`` items."""
    if size < 1:
        raise ValueError("size must be at least 1")
    start = 0
    while start < len(items):
        stop = start + size
        yield items[start:stop]
        start = stop


def count_${noun}_cycles(cycles: list[int], limit: int = $int1) -> dict[int, int]:
    counts: dict[int, int] = {}
    for position in range(len(cycles)):
        cycle = cycles[position]
        if cycle > limit:
            continue
        counts[cycle] = counts.get(cycle, 0) + 1
    step = 0
    for cycle in sorted(counts):
        step += 1
        if step % $int3 == 0:
            LOG.debug("cycle %d seen %d times", cycle, counts[cycle])
    return counts


def ${noun}_grid_index(row: int, column: int, columns: int) -> int:
    offset = row * columns
    return offset + column
'''),
    Template('''\


class ${Cls}Status(Enum):
    PENDING = "pending"
    RUNNING = "running"
    DONE = "done"
    FAILED = "failed"

    @classmethod
    def parse(cls, text: str) -> "${Cls}Status":
        try:
            return cls(text.strip().lower())
        except ValueError:
            LOG.warning("unknown $noun status %r, using pending", text)
            return cls.PENDING


class ${Cls}Registry:
    """Named $noun records, kept in insertion order."""

    def __init__(self, name: str) -> None:
        self.name = name
        self._records: dict[str, dict[str, str]] = {}
        self._status: dict[str, ${Cls}Status] = {}

    def __len__(self) -> int:
        return len(self._records)

    def __contains__(self, key: object) -> bool:
        return key in self._records

    def __repr__(self) -> str:
        return f"${Cls}Registry({self.name!r}, {len(self)} records)"

    def add(self, key: str, record: dict[str, str], status: str = "pending") -> None:
        if key in self._records:
            raise KeyError(f"{key} is already registered in {self.name}")
        self._records[key] = dict(record)
        self._status[key] = ${Cls}Status.parse(status)

    def mark(self, key: str, status: ${Cls}Status) -> None:
        self._status[key] = status
        LOG.info("%s: %s is now %s", self.name, key, status.value)

    def pending(self) -> list[str]:
        return [key for key, status in self._status.items() if status is ${Cls}Status.PENDING]

    @property
    def finished(self) -> bool:
        return all(status in (${Cls}Status.DONE, ${Cls}Status.FAILED) for status in self._status.values())
'''),
    Template('''\


def load_${noun}_settings(path: Path) -> dict[str, object]:
    """Settings from a JSON file; a missing file gives the defaults."""
    defaults: dict[str, object] = {"station": $int1, "cycle": 0, "label": "$noun", "tags": []}
    if not path.exists():
        LOG.info("no settings file %s, using defaults", path)
        return defaults
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as error:
        raise ValueError(f"{path}: not valid JSON: {error}") from error
    if not isinstance(data, dict):
        raise ValueError(f"{path}: expected an object at the top level")
    unknown = sorted(set(data) - set(defaults))
    if unknown:
        LOG.warning("%s: ignoring unknown keys %s", path, ", ".join(unknown))
    settings = dict(defaults)
    settings.update({key: value for key, value in data.items() if key in defaults})
    return settings


def save_${noun}_settings(path: Path, settings: dict[str, object]) -> Path:
    backup = path.with_suffix(path.suffix + ".bak")
    if path.exists():
        path.replace(backup)
    path.write_text(json.dumps(settings, indent=2, sort_keys=True), encoding="utf-8")
    return backup
'''),
    Template('''\


def find_${noun}_files(root: Path, pattern: str = "*$suffix") -> list[Path]:
    found = sorted(path for path in root.rglob(pattern) if path.is_file())
    hidden = [path for path in found if any(part.startswith(".") for part in path.parts)]
    for path in hidden:
        LOG.debug("skipping hidden %s", path)
    return [path for path in found if path not in hidden]


def ${verb}_${noun}_archive(sources: list[Path], target: Path) -> int:
    target.mkdir(parents=True, exist_ok=True)
    copied = 0
    for source in sources:
        destination = target / (source.stem + "_$verb" + source.suffix)
        if destination.exists():
            LOG.warning("%s exists, not overwritten", destination)
            continue
        destination.write_bytes(source.read_bytes())
        copied += 1
    LOG.info("copied %d of %d $noun files to %s", copied, len(sources), target)
    return copied
'''),
    Template('''\


def parse_${noun}_header(line: str) -> dict[str, str]:
    """Fields of a header line such as 'station=12 cycle=3 label=north'."""
    fields: dict[str, str] = {}
    for token in line.split():
        if "=" not in token:
            raise ValueError(f"bad header token {token!r} in {line!r}")
        key, _, value = token.partition("=")
        fields[key.strip().lower()] = value.strip().strip('"')
    return fields


def ${noun}_header_line(fields: dict[str, str]) -> str:
    parts = [f"{key}={value}" for key, value in sorted(fields.items())]
    return "# " + " ".join(parts)


def clean_${noun}_label(text: str) -> str:
    text = text.strip().lower()
    for old, new in ((" ", "_"), ("-", "_"), ("/", "_")):
        text = text.replace(old, new)
    while "__" in text:
        text = text.replace("__", "_")
    return text.strip("_") or "unnamed"
'''),
]

# Blocks with candidates (numpy kernels on float-annotated parameters).
KERNEL_BLOCKS = [
    Template('''\


def ${noun}_heat_content(temp: float, salinity: float, depth: float, rho: float = 917.0) -> float:
    """Heat content of one $noun layer (a synthetic formula)."""
    latent = temp + salinity + depth
    sensible = rho * temp * depth
    return latent - sensible + 0.5 * temp**3
'''),
    Template('''\


def ${noun}_column_stats(values: $arr, weight: float) -> tuple[float, float]:
    total = np.sum(values) * weight
    mean = np.mean(values)
    spread = values.sum() - total + mean
    return float(total), float(spread)
'''),
    Template('''\


def ${noun}_relax(a: float, b: float, rate: float, dt: float = $dt) -> float:
    low = min(a, b)
    high = max(a, b)
    return low + (high - low) * np.exp(-rate * dt)
'''),
    Template('''\


def ${noun}_profile(depths: $arr, t_top: float, t_bottom: float, k: float) -> $arr:
    frac = depths / depths.max()
    return t_top + (t_bottom - t_top) * frac**2 + k * frac
'''),
    Template('''\


def ${noun}_energy_budget(fluxes: $arr, dt: float, area: float) -> float:
    total = 0.0
    for flux in fluxes:
        total = total + flux * dt * area
    return total + np.sum(fluxes) / fluxes.size
'''),
    Template('''\


def ${noun}_growth_rate(thickness: float, air_temp: float, ocean_temp: float, k_ice: float = 2.03) -> float:
    gradient = (ocean_temp - air_temp) / thickness
    growth = k_ice * gradient * $dt
    damping = np.exp(-thickness) + 0.1 * thickness**2 + growth
    return min(growth, damping)
'''),
]


class PythonCorpusGenerator:
    """Deterministic Python corpus; the same seed and sizes give the same files."""

    def __init__(self, seed: int) -> None:
        self.rng = random.Random(seed)

    def _mapping(self) -> dict[str, str]:
        rng = self.rng
        noun = rng.choice(NOUNS)
        verb = rng.choice(VERBS)
        return {
            "noun": noun, "Cls": "".join(part.title() for part in noun.split("_")) + rng.choice(
                ["", "Set", "Store", "Batch", "Run"]),
            "verb": verb, "Verb": verb.title(), "field": rng.choice(FIELDS),
            "package": PACKAGE, "suffix": rng.choice([".txt", ".csv", ".json", ".dat"]),
            "int1": str(rng.randint(1, 999)), "int2": str(rng.randint(2, 64)),
            "int3": str(rng.randint(2, 9)), "width": str(rng.choice([60, 72, 80, 96])),
            "dt": rng.choice(["60.0", "300.0", "900.0", "3600.0"]),
            "arr": rng.choice(["np.ndarray", "NDArray[np.float64]"]),
        }

    def _block(self, templates: list[Template], used: set[str]) -> list[str]:
        # draw names until the block's first definition is new in this file
        for _ in range(50):
            mapping = self._mapping()
            text = self.rng.choice(templates).substitute(mapping)
            match = re.search(r"^(?:def|class) (\w+)", text, re.MULTILINE)
            if match and match.group(1) not in used:
                used.update(re.findall(r"^(?:def|class) (\w+)", text, re.MULTILINE))
                return text.split("\n")[:-1]
        raise RuntimeError("could not draw a new name")

    def module(self, size: int, kernel: bool, title: str) -> str:
        mapping = self._mapping()
        lines = HEADER.substitute(
            mapping, doc=title, const=f"{mapping['noun'].upper()}_LIMIT",
            extra="\nimport numpy as np\nfrom numpy.typing import NDArray\n" if kernel else "").split("\n")[:-1]
        used: set[str] = set()
        n_kernels = misses = 0
        while misses < 8:
            want_kernel = kernel and (n_kernels == 0 or self.rng.random() < 0.5)
            block = self._block(KERNEL_BLOCKS if want_kernel else CLEAN_BLOCKS, used)
            limit = size if len(lines) >= MIN_FILE_LINES and (n_kernels or not kernel) else MAX_FILE_LINES
            if len(lines) + len(block) > limit:
                misses += 1  # too long to fit: draw another, maybe smaller, block
                continue
            lines.extend(block)
            n_kernels += want_kernel
        return "\n".join(lines) + "\n"

    def plan_sizes(self, total: int) -> list[int]:
        sizes: list[int] = []
        remaining = total
        while remaining > 0:
            if remaining <= MAX_FILE_LINES:
                sizes.append(max(remaining, MIN_FILE_LINES))
                break
            size = self.rng.randint(MIN_FILE_LINES, min(MAX_FILE_LINES, remaining - MIN_FILE_LINES))
            sizes.append(size)
            remaining -= size
        return sizes

    def generate(self, total_lines: int, kernel_share: float) -> dict[str, tuple[str, bool]]:
        """Relative path -> (text, has candidates)."""
        sizes = self.plan_sizes(total_lines)
        n_kernel = min(len(sizes), max(1, round(kernel_share * len(sizes)))) if kernel_share > 0 else 0
        kernel_files = set(self.rng.sample(range(len(sizes)), n_kernel))
        files: dict[str, tuple[str, bool]] = {}
        deficit = 0  # lines a file came short of its size, given to the next one
        for index, size in enumerate(sizes):
            size = min(MAX_FILE_LINES, size + deficit)
            kernel = index in kernel_files
            sub = "physics" if kernel and self.rng.random() < 0.6 else self.rng.choice(SUBPACKAGES)
            name = f"{self.rng.choice(NOUNS)}_{self.rng.choice(VERBS)}_{index:03d}.py"
            relative = f"{PACKAGE}/{sub}/{name}"
            title = f"{sub}/{name}: {'kernels and helpers' if kernel else 'helpers'} for the {sub} part."
            text = self.module(size, kernel, title)
            deficit = size - text.count("\n")
            try:
                tree = ast.parse(text, relative)
            except SyntaxError as error:
                raise AssertionError(f"generated {relative} does not parse: {error}") from error
            reasons = candidate_reasons(tree)
            if kernel and not reasons:
                raise AssertionError(f"generated kernel file {relative} holds no candidate")
            if not kernel and reasons:
                raise AssertionError(f"generated clean file {relative} holds candidates: {reasons[:3]}")
            files[relative] = (text, kernel)
        return files


# --------------------------------------------------------------------------- timing
def _time_once(cmd: list[str], ok_codes: tuple[int, ...]) -> tuple[float, subprocess.CompletedProcess]:
    return time_once(cmd, ok_codes, keep_stdout=True)


def _prepare_dir(keep: str | None) -> tuple[Path, tempfile.TemporaryDirectory | None]:
    if keep is None:
        tmp = tempfile.TemporaryDirectory(prefix="samebits-bench-py-")
        return Path(tmp.name), tmp
    path = Path(keep)
    if path.exists() and (not path.is_dir() or any(path.iterdir())):
        raise SystemExit(f"--keep {keep}: exists and is not an empty directory")
    path.mkdir(parents=True, exist_ok=True)
    return path, None


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--lines", type=int, default=20000, help="size of the generated corpus (default 20000)")
    ap.add_argument("--repeat", type=int, default=3, help="runs of each command; the median is shown (default 3)")
    ap.add_argument("--samebits", default="samebits", metavar="CMD",
                    help="command that runs the tool, split like a shell would (default: samebits)")
    ap.add_argument("--only-parse", action="store_true", help="time the libcst parse only")
    ap.add_argument("--keep", metavar="PATH",
                    help="write the corpus into PATH (a new or empty directory) and leave it there")
    ap.add_argument("--seed", type=int, default=1729, help="seed of the generator (default 1729)")
    ap.add_argument("--kernel-share", type=float, default=0.12, metavar="F",
                    help="share of the files with candidates (default 0.12)")
    args = ap.parse_args(argv)
    if args.lines < 1 or args.repeat < 1 or not 0.0 <= args.kernel_share <= 1.0:
        ap.error("--lines and --repeat must be positive, --kernel-share within [0, 1]")

    files = PythonCorpusGenerator(args.seed).generate(args.lines, args.kernel_share)
    corpus, tmp = _prepare_dir(args.keep)
    try:
        for relative, (text, _kernel) in files.items():
            target = corpus / relative
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_text(text, encoding="utf-8")
        return _run(args, corpus, files)
    finally:
        if tmp is not None:
            tmp.cleanup()


def parallel_jobs() -> str:
    try:
        return f"{len(os.sched_getaffinity(0))} here"
    except (AttributeError, OSError):
        return f"{os.cpu_count()} here"


def _run(args: argparse.Namespace, corpus: Path, files: dict[str, tuple[str, bool]]) -> int:
    n_lines = sum(text.count("\n") for text, _kernel in files.values())
    n_kernel = sum(1 for _text, kernel in files.values() if kernel)
    sizes = [text.count("\n") for text, _kernel in files.values()]
    print(f"corpus: {len(files)} files, {n_lines} lines ({min(sizes)}-{max(sizes)} per file), "
          f"{n_kernel} files with candidates, {len(files) - n_kernel} with nothing to change", flush=True)
    print("ast.parse of every file: ok; clean files hold no candidate: ok (not timed)", flush=True)
    if args.keep:
        print(f"corpus kept in {corpus}", flush=True)

    parse_cmd = [sys.executable, "-c", PARSE_SNIPPET, str(corpus)]
    check_cmd = None if args.only_parse else shlex.split(args.samebits) + ["check", str(corpus)]
    single_cmd = None if check_cmd is None else shlex.split(args.samebits) + ["check", "--jobs", "1", str(corpus)]
    status = 0
    if check_cmd is not None and shutil.which(check_cmd[0]) is None:
        print(f"samebits check: skipped (command not found: {check_cmd[0]}; from a checkout, try "
              f"--samebits \"{Path(sys.executable).name} -m rewrite.cli\")", flush=True)
        check_cmd, single_cmd, status = None, None, 2

    check_times: list[float] = []
    single_times: list[float] = []
    parse_times: list[float] = []
    last_check = None
    try:
        for _ in range(args.repeat):
            if check_cmd is not None:
                elapsed, last_check = _time_once(check_cmd, (0, 1))
                check_times.append(elapsed)
                single_times.append(_time_once(single_cmd, (0, 1))[0])
            parse_times.append(_time_once(parse_cmd, (0,))[0])
    except RuntimeError as err:
        print(f"run failed: {err}", file=sys.stderr)
        return 1

    parse = statistics.median(parse_times)
    runs = f"median of {args.repeat}; both are subprocesses, so both include interpreter start-up and imports"
    if check_times:
        check = statistics.median(check_times)
        single = statistics.median(single_times)
        print(f"python check: samebits check {check:.2f} s, bare libcst parse {parse:.2f} s, "
              f"ratio {check / parse:.2f} (target <= {TARGET_RATIO})")
        print(f"python check, one process: samebits check --jobs 1 {single:.2f} s, "
              f"ratio {single / parse:.2f} (the parse uses one process; the default uses every core: "
              f"{parallel_jobs()})")
        print(f"({runs})")
        named = {line.split(":", 1)[0] for line in last_check.stdout.splitlines() if re.match(r"[^:]+:\d+:", line)}
        print(f"samebits check: exit {last_check.returncode}, {len(last_check.stdout.splitlines())} output lines "
              f"naming {len(named)} files (of {n_kernel} with candidates)")
    else:
        print(f"python check: bare libcst parse {parse:.2f} s ({runs})")
    return status


if __name__ == "__main__":
    sys.exit(main())
