"""Commands whose method allows a sample on large data: the ``--sample`` option and the line
that says what was sampled ("sampled N of M rows, seed S"), in the table and in the JSON."""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from workbench.engine.batch import sample_rows
from workbench.engine.errors import InputError


@dataclass(frozen=True)
class RowSample:
    """How many of the rows a command used, and the seed that drew them."""

    rows: int
    rows_in_data: int
    seed: int
    what: str = ""  # what the rows were used for, when not everything

    @property
    def sampled(self) -> bool:
        return self.rows < self.rows_in_data

    def line(self) -> str:
        if self.sampled:
            return f"sampled {self.rows:,} of {self.rows_in_data:,} rows, seed {self.seed}"
        return f"all {self.rows_in_data:,} rows"

    def as_dict(self) -> dict:
        return {"sampled": self.sampled, "rows": self.rows, "rows_in_data": self.rows_in_data,
                "seed": self.seed, "what": self.what or None, "statement": self.line()}


def add_sample_option(parser, default: int, what: str, *aliases: str) -> None:
    parser.add_argument("--sample", *aliases, dest="sample", type=int, default=default,
                        metavar="N", help=f"{what}: a seeded uniform sample of at most N rows "
                                          f"(default {default:,}; 0: every row)")


def take_sample(frame: pd.DataFrame, size: int, seed: int) -> tuple[pd.DataFrame, RowSample]:
    """``frame`` or a seeded uniform sample of ``size`` of its rows (in their order); 0: all."""
    if size is None or size == 0:
        return frame, RowSample(len(frame), len(frame), seed)
    if size < 2:
        raise InputError(f"--sample must be at least 2 rows (or 0 for every row), not {size}")
    picked = sample_rows(frame, size, seed)
    return picked, RowSample(len(picked), len(frame), seed)


def checks_sampled(results) -> list[RowSample]:
    """The audit checks that worked on a sample, read from their recorded parameters."""
    out = []
    for r in results:
        p = r.parameters or {}
        if p.get("sampled") and "rows" in p and "rows_in_data" in p:
            out.append(RowSample(int(p["rows"]), int(p["rows_in_data"]), int(p.get("seed", 0)),
                                 r.id))
    return out
