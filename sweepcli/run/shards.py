"""Shards of a grid for cluster array jobs: deterministic, load-balanced subsets.

Shard ``I`` of ``N`` (1-based) holds the flat grid indices ``i`` with ``i % N == I - 1``: a
stride through the whole grid, so every shard samples every region of parameter space and the
shards cost about the same.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..errors import SweepError


@dataclass(frozen=True)
class Shard:
    index: int  # 1-based
    count: int

    def indices(self, size: int) -> np.ndarray:
        return np.arange(self.index - 1, size, self.count, dtype=np.int64)

    def label(self) -> str:
        return f"{self.index}/{self.count}"

    def suffix(self) -> str:
        return f".shard-{self.index:0{len(str(self.count))}d}-of-{self.count}"


SHARD_HELP = ("I/N (1 <= I <= N), 'auto' (the index and count of a Slurm array task) or "
              "'auto/N' (the index of a Slurm or PBS array task, N shards)")


def parse_shard(text: str, environ: Mapping[str, str] | None = None) -> Shard:
    """Parse ``--shard``; ``auto`` reads the array-task index from the environment.

    Slurm: ``SLURM_ARRAY_TASK_ID`` with ``SLURM_ARRAY_TASK_MIN`` (default 1),
    ``SLURM_ARRAY_TASK_STEP`` (default 1) and ``SLURM_ARRAY_TASK_COUNT`` (or ``..._MAX``).
    PBS Pro ``PBS_ARRAY_INDEX``, Torque ``PBS_ARRAYID``: neither exports a count, so give it as
    ``auto/N``; their indices are taken as 1-based (``#PBS -J 1-N``, ``-t 1-N``).
    """
    env = os.environ if environ is None else environ
    m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", text)
    if m:
        return _checked(int(m.group(1)), int(m.group(2)), text)
    m = re.fullmatch(r"\s*auto\s*(?:/\s*(\d+))?\s*", text)
    if not m:
        raise SweepError(f"--shard must be {SHARD_HELP}; got {text!r}.")
    count = int(m.group(1)) if m.group(1) else None
    if "SLURM_ARRAY_TASK_ID" in env:
        task = _env_int(env, "SLURM_ARRAY_TASK_ID")
        low = _env_int(env, "SLURM_ARRAY_TASK_MIN", 1)
        step = _env_int(env, "SLURM_ARRAY_TASK_STEP", 1)
        if count is None:
            if "SLURM_ARRAY_TASK_COUNT" in env:
                count = _env_int(env, "SLURM_ARRAY_TASK_COUNT")
            elif "SLURM_ARRAY_TASK_MAX" in env:
                count = (_env_int(env, "SLURM_ARRAY_TASK_MAX") - low) // step + 1
        if count is None:
            raise SweepError("--shard auto: SLURM_ARRAY_TASK_ID is set but neither "
                             "SLURM_ARRAY_TASK_COUNT nor SLURM_ARRAY_TASK_MAX; give the count as "
                             "--shard auto/N.")
        return _checked((task - low) // step + 1, count, f"auto from Slurm (task {task})")
    for name in ("PBS_ARRAY_INDEX", "PBS_ARRAYID"):
        if name in env:
            if count is None:
                raise SweepError(f"--shard auto: {name} is set but PBS exports no array size; "
                                 "give it as --shard auto/N.")
            return _checked(_env_int(env, name), count, f"auto from {name}")
    raise SweepError("--shard auto: no array-task index in the environment (looked for "
                     "SLURM_ARRAY_TASK_ID, PBS_ARRAY_INDEX, PBS_ARRAYID).")


def _env_int(env: Mapping[str, str], name: str, default: int | None = None) -> int:
    if name not in env:
        if default is None:
            raise SweepError(f"--shard auto: {name} is not set.")
        return default
    try:
        return int(env[name])
    except ValueError:
        raise SweepError(f"--shard auto: {name} must be an integer; got {env[name]!r}.") from None


def _checked(index: int, count: int, given: str) -> Shard:
    if count < 1 or not 1 <= index <= count:
        resolved = f"{index}/{count}"
        shown = given if given == resolved else f"{given} = {resolved}"  # say "auto" resolved to
        raise SweepError(f"--shard must be {SHARD_HELP}; got {shown}.")
    return Shard(index, count)
