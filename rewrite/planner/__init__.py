"""The planner: rules from sites to edits and findings. It knows no language's syntax.

Each rule is a function ``rule(site, text, options) -> (edits, findings)``; rules do not call
each other. ``plan`` runs the enabled rules over all sites and keeps edits that can land
together.
"""
from __future__ import annotations

from ..edits import Edit, Finding, Occupancy
from ..ir import Site
from . import chains, powers

RULES = {"power": powers.plan, "chain": chains.plan}


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
    return edits, findings
