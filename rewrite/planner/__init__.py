"""The planner: rules from sites to edits and findings. It knows no language's syntax.

Each rule is a function ``rule(site, text, options) -> (edits, findings)``; rules do not call
each other. ``plan`` runs the enabled rules over all sites and keeps edits that can land
together.
"""
from __future__ import annotations

import bisect

from ..edits import ANSWER_CHANGING, Edit, Finding, Occupancy, TextChange
from ..ir import Site, Span
from . import audit, chains, powers, reductions, zeros

RULES = {"sum": reductions.plan, "power": powers.plan, "chain": chains.plan, "zero": zeros.plan,
         "audit": audit.plan}


def plan(sites: list[Site], text: str, options, spelling) -> tuple[list[Edit], list[Finding]]:
    """``spelling`` is the front end's: one-line display of spans, literals of a kind, calls."""
    edits: list[Edit] = []
    findings: list[Finding] = []
    taken = Occupancy()
    for name, rule in RULES.items():
        if name not in options.rules:
            continue
        for site in sites:
            proposed, noted = rule(site, text, options, spelling)
            for edit in proposed:
                if taken.fits(edit):
                    taken.take(edit)
                    edits.append(edit)
                else:
                    findings.append(Finding(edit.span, edit.rule, "left as it is: overlaps another edit"))
            findings.extend(noted)
    return edits + _imports(sites, edits, spelling), findings


def _imports(sites: list[Site], edits: list[Edit], spelling) -> list[Edit]:
    """One import edit per scoping unit for the runtime functions its edits call."""
    needed: dict[str, tuple] = {}
    calling = sorted((e for e in edits if e.requires), key=lambda e: e.span.start)
    if not calling:
        return []
    starts = [e.span.start for e in calling]
    for site in sites:
        anchor = site.anchor
        if anchor is None:
            continue
        low = bisect.bisect_left(starts, site.span.start)
        high = bisect.bisect_left(starts, site.span.end)
        names = {name for e in calling[low:high] for name in e.requires} - anchor.runtime_names
        if names and "*" not in anchor.runtime_names:
            current = needed.get(anchor.unit, (anchor, set()))
            needed[anchor.unit] = (anchor, current[1] | names)
    imports = []
    for anchor, names in needed.values():
        line = spelling.import_line(sorted(names), anchor.indent, anchor.newline)
        imports.append(Edit(Span(anchor.offset, anchor.offset), (TextChange(anchor.offset, anchor.offset, line),),
                            "runtime", ANSWER_CHANGING,
                            f"imports {', '.join(sorted(names))} {spelling.runtime_note}: the answer-changing "
                            f"edits of this unit call it", "", line.strip()))
    return imports
