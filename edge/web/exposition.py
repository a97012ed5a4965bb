"""Prometheus text format 0.0.4 written straight from the metric families.

``/metrics`` serves this rather than ``prometheus_client.generate_latest``: with 500 points
and their alarms (~6,000 series) generic exposition took ~100 ms of a 2-core box per
scrape, this takes a fraction of it. Both read the same ``families(view)``, and a test
checks that they say the same thing sample for sample.
"""

from __future__ import annotations

import math
from functools import lru_cache

from edge.web.metrics import Family

__all__ = ["CONTENT_TYPE", "render"]

CONTENT_TYPE = "text/plain; version=0.0.4; charset=utf-8"


@lru_cache(maxsize=65536)
def _escape(value: str) -> str:
    return value.replace("\\", r"\\").replace("\n", r"\n").replace('"', r"\"")


@lru_cache(maxsize=65536)
def _labels(names: tuple[str, ...], values: tuple[str, ...]) -> str:
    if not names:
        return ""
    inner = ",".join(f'{n}="{_escape(v)}"' for n, v in zip(names, values, strict=True))
    return "{" + inner + "}"


def _number(value: float) -> str:
    if value == math.inf:
        return "+Inf"
    if value == -math.inf:
        return "-Inf"
    if value != value:  # NaN
        return "NaN"
    return repr(float(value))


def _help(text: str) -> str:
    return text.replace("\\", r"\\").replace("\n", r"\n")


def render(families: list[Family]) -> bytes:
    """The exposition text of ``families``."""
    out: list[str] = []
    add = out.append
    for fam in families:
        name = fam.name + ("_total" if fam.kind == "counter" else "")
        add(f"# HELP {name} {_help(fam.help)}\n# TYPE {name} {fam.kind}\n")
        names = fam.labels
        bucket_names = (*names, "le")
        for suffix, values, value in fam.samples:
            labels = _labels(bucket_names if suffix == "_bucket" else names, values)
            add(f"{fam.name}{suffix}{'_total' if fam.kind == 'counter' else ''}")
            add(f"{labels} {_number(value)}\n")
    return "".join(out).encode()
