"""JSON for editors: one document for a whole run.

Format (ours, version 1)::

  {"format": "samebits-report", "version": 1,
   "files": [{"path": str, "skipped": str | null,
              "problems": [{"line": int, "message": str}],
              "edits": [{"rule": str, "effect": "bit-for-bit" | "answer-changing", "reason": str,
                         "line": int, "column": int, "start": int, "end": int,
                         "before": str, "after": str,
                         "changes": [{"start": int, "end": int, "text": str}]}],
              "findings": [{"rule": str, "severity": "note" | "warning" | "error", "kind": str,
                            "message": str, "line": int, "column": int, "start": int, "end": int}]}],
   "summary": {"files": int, "edits": int, "bit-for-bit": int, "answer-changing": int,
               "findings": int, "problems": int}}

Offsets (start, end) count characters of the file decoded as UTF-8 (undecodable bytes count one
each); lines and columns are 1-based. A finding's ``kind`` says what the audit found (``libm``,
``libm-loop``, ``blas``, ``fma``, ``build``; empty for other rules' notes).
"""
from __future__ import annotations

import json

from ..edits import ANSWER_CHANGING, BIT_FOR_BIT
from .paths import shown


def _file(result) -> dict:
    return {
        "path": shown(result.path),
        "skipped": result.notice or None,
        "problems": [{"line": p.line, "message": p.message} for p in result.problems],
        "edits": [{
            "rule": e.rule, "effect": e.effect, "reason": e.reason, "line": e.line, "column": e.column,
            "start": e.span.start, "end": e.span.end, "before": e.before, "after": e.after,
            "changes": [{"start": c.start, "end": c.end, "text": c.text} for c in e.changes],
        } for e in result.edits],
        "findings": [{
            "rule": f.rule, "severity": f.severity, "kind": f.kind, "message": f.message, "line": f.line,
            "column": f.column, "start": f.span.start, "end": f.span.end,
        } for f in result.findings],
    }


def report(results) -> str:
    files = [_file(r) for r in results]
    edits = [e for r in results for e in r.edits]
    summary = {
        "files": len(results),
        "edits": len(edits),
        BIT_FOR_BIT: sum(1 for e in edits if e.effect == BIT_FOR_BIT),
        ANSWER_CHANGING: sum(1 for e in edits if e.effect == ANSWER_CHANGING),
        "findings": sum(len(r.findings) for r in results),
        "problems": sum(len(r.problems) for r in results),
    }
    return json.dumps({"format": "samebits-report", "version": 1, "files": files, "summary": summary},
                      indent=2, ensure_ascii=True)
