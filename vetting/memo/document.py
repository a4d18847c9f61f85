"""A neutral document model for the decision memo.

The memo builder fills these plain objects; one renderer per format (Markdown, HTML, Word)
turns them into a file. Every string held here is plain text exactly as the user entered it
or as the builder formatted it: escaping is the renderer's job, never the builder's.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union


@dataclass
class Paragraph:
    text: str
    #: "normal", "lead" (a short summary line) or "small" (fine print)
    style: str = "normal"


@dataclass
class BulletList:
    items: list[str]


@dataclass
class Facts:
    """Label/value pairs shown as a compact two-column list."""

    rows: list[tuple[str, str]]


@dataclass
class Table:
    columns: list[str]
    rows: list[list[str]]
    caption: str | None = None
    #: indexes of columns holding numbers (right-aligned)
    numeric: set[int] = field(default_factory=set)


@dataclass
class Callout:
    """A boxed notice. kind: "decision", "warning" or "note"."""

    kind: str
    title: str
    lines: list[str]


@dataclass
class SweepChart:
    """Expected success rate and expected impact ratio across selection ratios."""

    selection_ratios: list[float]
    success_rates: list[float]
    impact_ratios: list[float | None]
    base_rate: float | None
    planned_ratio: float | None
    impact_floor: float
    instrument: str


@dataclass
class DistributionChart:
    """A norm group's score distribution (normal model) with the cut and its SEM band."""

    mean: float
    sd: float
    cut_raw: float
    band_low: float
    band_high: float
    norm_label: str
    instrument: str


Chart = Union[SweepChart, DistributionChart]


@dataclass
class Figure:
    """A chart for HTML and Word; Markdown shows `table` (the same numbers) instead."""

    chart: Chart
    caption: str
    table: Table


Block = Union[Paragraph, BulletList, Facts, Table, Callout, Figure]


@dataclass
class Section:
    key: str
    title: str
    blocks: list[Block] = field(default_factory=list)
    subsections: list[Section] = field(default_factory=list)

    def add(self, block: Block) -> Block:
        self.blocks.append(block)
        return block

    def sub(self, key: str, title: str) -> Section:
        section = Section(key=key, title=title)
        self.subsections.append(section)
        return section


@dataclass
class Document:
    title: str
    subtitle: str
    sections: list[Section] = field(default_factory=list)
    #: machine-readable stamp (fingerprint, job key, record sub-fingerprints); see fingerprint.py
    stamp: dict = field(default_factory=dict)
    #: document properties for formats that have them (author, status, date)
    author: str = ""
    status: str = "draft"
    date: str = ""

    def section(self, key: str, title: str) -> Section:
        section = Section(key=key, title=title)
        self.sections.append(section)
        return section

    def find(self, key: str) -> Section | None:
        def walk(items: list[Section]) -> Section | None:
            for s in items:
                if s.key == key:
                    return s
                hit = walk(s.subsections)
                if hit is not None:
                    return hit
            return None

        return walk(self.sections)
