"""Mutated job files and damaged results files through the command line, tallied.

The mutations (shared with ``test_fuzz.py``, which draws them with hypothesis):

* job files: the demo jobs (``jobs/*.toml``, grids cut to 2 values per axis) with one key
  deleted, or its value replaced by another type, a huge, NaN, infinite or negative number,
  a NUL character, 3000-deep nested arrays or a 10,000-character string; ``check`` and ``run``;
* results files: a small run's file truncated, with bytes flipped, a dataset or attribute
  deleted, a dataset of another dtype or shape, or an attribute of another type; ``show``,
  ``map``, ``diff``, ``merge``, ``sample`` and ``export``.

Each case runs in-process (typer's CliRunner) in its own directory and is classified:
``exit 2`` (one ``error:`` line naming the file), ``exit 0/1/4`` (a harmless change, a difference
found, points failed) or a fault (a traceback, a message not naming the file, a file left by a
refused run, another exit code). Run ``python3 -m tests.robustness.fuzz_tally -n 400`` from
the repository root; it prints the tally (tried / exit 2 / other) and each fault.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import random
import shutil
import tempfile
import tomllib
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import h5py
import numpy as np
import tomli_w
from typer.testing import CliRunner

from sweepcli.cli import app

ROOT = Path(__file__).resolve().parents[2]
JOBS = sorted((ROOT / "jobs").glob("*.toml"))
# Jobs cheap enough to run with two values per axis (open-sample counts are not).
RUNNABLE = {"quickstart", "chiral-chain", "driven-chain", "honeycomb-flux", "bhz-spin",
            "anomalous-five-step"}
DEEP = "__deep_nesting__"
BAD_VALUES = ["text", [], {}, True, 1e308, -1e308, math.nan, math.inf, -1, 0, -1.5, 10**18,
              "2**70", "1e308", "a\x00b", DEEP, "x" * 10_000, "(" * 400 + "1" + ")" * 400,
              [1, "a"], [[1, 2], [3]], {"x": 1}]


@dataclass
class Case:
    kind: str  # "job" or "results"
    command: str
    mutation: str
    exit_code: int | None = None
    fault: str = ""  # empty when the outcome is acceptable
    message: str = field(default="", repr=False)


def small(doc: dict) -> dict:
    """The job with two values per swept axis (and a shallow refinement), so runs are quick."""
    for name, axis in list(doc.get("sweep", {}).items()):
        if isinstance(axis, dict) and "num" in axis:
            axis["num"] = min(axis["num"], 2)
        elif isinstance(axis, list):
            doc["sweep"][name] = axis[:2]
    if "refine" in doc:
        doc["refine"]["depth"] = min(doc["refine"].get("depth", 1), 1)
    return doc


def leaf_paths(node, prefix=()) -> list[tuple]:
    """Paths (keys and list indices) to every value of a parsed TOML document."""
    out = []
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for key, value in items:
        out.append((*prefix, key))
        if isinstance(value, dict | list):
            out += leaf_paths(value, (*prefix, key))
    return out


def mutate(doc: dict, rng: random.Random) -> tuple[dict, str]:
    """One mutation of ``doc`` (in place): delete a key or replace a value."""
    path = rng.choice(leaf_paths(doc))
    parent = doc
    for key in path[:-1]:
        parent = parent[key]
    where = ".".join(str(p) for p in path)
    if rng.random() < 0.25:
        del parent[path[-1]]
        return doc, f"delete {where}"
    value = rng.choice(BAD_VALUES)
    parent[path[-1]] = value
    shown = "3000-deep array" if value == DEEP else repr(value)[:40]
    return doc, f"{where} = {shown}"


def job_text(doc: dict) -> str:
    text = tomli_w.dumps(doc)
    return text.replace(f'"{DEEP}"', "[" * 3000 + "]" * 3000)


def classify(case: Case, result, named: str, ok_codes: tuple[int, ...], directory: Path,
             keep: set[str]) -> Case:
    case.exit_code = result.exit_code
    text = result.output
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        case.fault = f"exception {type(result.exception).__name__}: {result.exception}"[:300]
    elif "Traceback" in text:
        case.fault = "traceback in the output"
    elif result.exit_code == 2:
        lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
        if len(lines) != 1 or not lines[0].startswith("error: ") or named not in lines[0]:
            case.fault = f"exit 2 without one line naming {named}: {result.stderr[:300]!r}"
        left = sorted(p.name for p in directory.iterdir() if p.name not in keep)
        if case.command == "run" and left:
            case.fault = f"a refused run left {left}"
    elif result.exit_code not in ok_codes:
        case.fault = f"exit {result.exit_code}: {text[-300:]!r}"
    case.message = text[-300:]
    return case


@contextlib.contextmanager
def inside(directory: Path):
    before = os.getcwd()
    os.chdir(directory)
    try:
        yield
    finally:
        os.chdir(before)


def job_case(job: Path, command: str, seed: int, directory: Path) -> Case:
    """One mutated job through ``check`` or ``run`` inside ``directory``."""
    rng = random.Random(seed)
    doc = small(tomllib.loads(job.read_text()))
    doc.setdefault("output", {})["path"] = "out.h5"
    doc, what = mutate(doc, rng)
    path = directory / "job.toml"
    path.write_text(job_text(doc))
    args = (["check", str(path), "--probe-seconds", "0.1"] if command == "check"
            else ["run", str(path), "--no-progress"])
    with inside(directory):
        result = CliRunner().invoke(app, args)
    case = Case("job", command, f"{job.stem}: {what}")
    ok = (0,) if command == "check" else (0, 4)
    return classify(case, result, str(path), ok, directory, {"job.toml"})


def reference_results(directory: Path) -> Path:
    """A small complete results file (quickstart, 3 x 2 points)."""
    doc = tomllib.loads((ROOT / "jobs" / "quickstart.toml").read_text())
    doc["sweep"]["m"]["num"], doc["sweep"]["t"]["num"] = 3, 2
    out = directory / "ref.h5"
    doc["output"]["path"] = str(out)
    job = directory / "ref.toml"
    job.write_text(tomli_w.dumps(doc))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    return out


DAMAGES = ["truncate", "flip bytes", "zero file", "delete dataset", "delete root attribute",
           "delete dataset attribute", "dataset of strings", "dataset of another shape",
           "attribute of another type", "dataset of floats for ints", "garbage attribute text",
           "delete table"]


def damage(path: Path, how: str, rng: random.Random) -> str:
    """Damage the results file ``path`` in place; returns what was done."""
    if how == "truncate":
        size = path.stat().st_size
        cut = rng.randrange(0, size)
        with open(path, "r+b") as fh:
            fh.truncate(cut)
        return f"truncate to {cut} of {size} bytes"
    if how == "flip bytes":
        data = bytearray(path.read_bytes())
        spots = [rng.randrange(len(data)) for _ in range(rng.choice([1, 4, 32]))]
        for i in spots:
            data[i] ^= 1 << rng.randrange(8)
        path.write_bytes(bytes(data))
        return f"flip {len(spots)} bits"
    if how == "zero file":
        path.write_bytes(b"")
        return "empty file"
    with h5py.File(path, "r+") as f:
        datasets = [k for k in f if isinstance(f[k], h5py.Dataset)]
        name = rng.choice(datasets)
        if how == "delete dataset":
            del f[name]
            return f"delete dataset {name}"
        if how == "delete root attribute":
            attr = rng.choice(sorted(f.attrs))
            del f.attrs[attr]
            return f"delete attribute {attr}"
        if how == "delete dataset attribute":
            attrs = sorted(f[name].attrs)
            if not attrs:
                return "nothing (no attribute)"
            attr = rng.choice(attrs)
            with contextlib.suppress(RuntimeError, KeyError):  # a dimension scale's own
                del f[name].attrs[attr]
            return f"delete attribute {attr} of {name}"
        if how in ("dataset of strings", "dataset of another shape", "dataset of floats for ints"):
            shape = f[name].shape
            del f[name]
            if how == "dataset of strings":
                f.create_dataset(name, data=np.full(shape, "x", dtype=object),
                                 dtype=h5py.string_dtype())
            elif how == "dataset of another shape":
                f.create_dataset(name, data=np.zeros(tuple(s + 1 for s in shape) + (2,)))
            else:
                f.create_dataset(name, data=np.full(shape, 0.5))
            return f"{how}: {name}"
        if how == "delete table":
            groups = [k for k in f if isinstance(f[k], h5py.Group)]
            if not groups:
                return "nothing (no table)"
            g = rng.choice(groups)
            del f[g]
            return f"delete group {g}"
        attr = rng.choice(sorted(f.attrs))
        if how == "attribute of another type":
            f.attrs[attr] = rng.choice([5, np.arange(3), 1.5])
        else:
            f.attrs[attr] = rng.choice(["", ",,,", "x" * 5000, "m,m", "nope"])
        return f"{how}: {attr}"


RESULTS_COMMANDS = ["show", "map", "map --terminal", "diff", "merge", "sample", "export"]


def results_case(reference: Path, how: str, command: str, seed: int, directory: Path) -> Case:
    rng = random.Random(seed)
    bad = directory / "bad.h5"
    shutil.copy(reference, bad)
    what = damage(bad, how, rng)
    args = {"show": ["show", str(bad)],
            "map": ["map", str(bad), "-o", str(directory / "map.png")],
            "map --terminal": ["map", str(bad), "--terminal"],
            "diff": ["diff", str(bad), str(reference)],
            "merge": ["merge", str(directory / "merged.h5"), str(bad)],
            "sample": ["sample", str(bad), "--at", "m=0", "--at", "t=0.25", "--size", "6",
                       "-o", str(directory / "sample.png")],
            "export": ["export", str(bad), "-o", str(directory / "out.csv")]}[command]
    with inside(directory):
        result = CliRunner().invoke(app, args)
    case = Case("results", command, what)
    return classify(case, result, str(bad), (0, 1), directory, set(os.listdir(directory)))


def tally(cases: list[Case]) -> str:
    counts = Counter("exit 2" if c.exit_code == 2 and not c.fault else
                     ("fault" if c.fault else f"exit {c.exit_code}") for c in cases)
    other = len(cases) - counts["exit 2"]
    detail = ", ".join(f"{k} {v}" for k, v in sorted(counts.items()) if k != "exit 2")
    return (f"tried {len(cases)} / exit 2 {counts['exit 2']} / other {other}"
            + (f" ({detail})" if detail else ""))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("-n", type=int, default=400, help="mutated job files (check and run)")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    rng = random.Random(args.seed)
    cases = []
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for _ in range(args.n):
            job = rng.choice(JOBS)
            commands = ["check"] + (["run"] if job.stem in RUNNABLE else [])
            for command in commands:
                d = Path(tempfile.mkdtemp(dir=tmp))
                cases.append(job_case(job, command, rng.randrange(2**32), d))
        reference = reference_results(Path(tempfile.mkdtemp(dir=tmp)))
        damaged = []
        for how in DAMAGES:
            for command in RESULTS_COMMANDS:
                for _ in range(3):
                    d = Path(tempfile.mkdtemp(dir=tmp))
                    damaged.append(results_case(reference, how, command,
                                                rng.randrange(2**32), d))
    for kind, group in (("job files", cases), ("results files", damaged)):
        print(f"{kind}: {tally(group)}")
        for command in sorted({c.command for c in group}):
            print(f"  {command}: {tally([c for c in group if c.command == command])}")
    for c in cases + damaged:
        if c.fault:
            print(f"FAULT {c.command} [{c.mutation}]: {c.fault}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
