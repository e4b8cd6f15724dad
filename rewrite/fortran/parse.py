"""fparser2 as the arbiter of validity for single statements.

Our own lexer and expression parser produce the exact spans; fparser2 decides, when ours
cannot read a statement, whether the statement is invalid Fortran (a problem: the file is left
untouched) or valid Fortran we do not analyse (a finding: the statement is left as it is).
Whole-file fparser2 parses cost more than the whole rewrite, so only such statements reach it.
fparser2 can end the process with SystemExit on odd input: that is caught here.
"""
from __future__ import annotations

import functools
import logging


@functools.lru_cache(maxsize=1)
def _statement_classes():
    from fparser.two import Fortran2003 as f2003
    from fparser.two.parser import ParserFactory

    ParserFactory().create(std="f2008")
    logging.getLogger("fparser").setLevel(logging.CRITICAL)
    names = [
        "Action_Stmt", "If_Then_Stmt", "Else_If_Stmt", "Else_Stmt", "End_If_Stmt", "Label_Do_Stmt",
        "Nonlabel_Do_Stmt", "End_Do_Stmt", "Where_Construct_Stmt", "Masked_Elsewhere_Stmt",
        "Elsewhere_Stmt", "End_Where_Stmt", "Select_Case_Stmt", "Case_Stmt", "End_Select_Stmt",
        "Forall_Construct_Stmt", "End_Forall_Stmt", "Associate_Stmt", "End_Associate_Stmt",
        "Select_Type_Stmt", "Type_Guard_Stmt", "Type_Declaration_Stmt", "Specification_Stmt",
        "Implicit_Stmt", "Use_Stmt", "Format_Stmt", "Entry_Stmt", "Stmt_Function_Stmt",
        "Block_Stmt", "End_Block_Stmt",
    ]
    return [getattr(f2003, name) for name in names if hasattr(f2003, name)]


def is_valid_statement(text: str) -> bool:
    """True when fparser2 accepts ``text`` as one Fortran 2008 statement."""
    for cls in _statement_classes():
        try:
            if cls(text) is not None:
                return True
        except (Exception, SystemExit, RecursionError):
            continue
    return False
