"""Declarations and scopes of free-form Fortran: what type a name has at a given place.

Scopes nest as the source does (file, module, program, procedure, interface body, derived type,
block). A name is resolved through its own scope, its USE statements (modules defined in the
same file or batch), its hosts, then implicit typing. A name that may come from a module we do
not know (USE without ONLY of an unknown module, INCLUDE) is unknown, never guessed.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..ir import UNKNOWN, Category, NumType
from .expr import Argument

_DEFAULT_IMPLICIT = {
    letter: NumType(Category.INTEGER if "i" <= letter <= "n" else Category.REAL)
    for letter in "abcdefghijklmnopqrstuvwxyz"
}


@dataclass
class Symbol:
    name: str
    type: NumType | None = None
    is_array: bool = False
    is_function: bool = False
    is_intrinsic: bool = False
    is_parameter: bool = False
    rank: int = 0  # 0: scalar or not known


@dataclass
class Use:
    module: str
    only: dict[str, str] | None  # local name -> name in the module; None: everything
    renames: dict[str, str] = field(default_factory=dict)


@dataclass
class DerivedType:
    name: str
    components: dict[str, Symbol]
    parent: str | None


@dataclass
class Scope:
    kind: str  # file module program subroutine function interface-body interface type block
    name: str
    parent: "Scope | None"
    symbols: dict[str, Symbol] = field(default_factory=dict)
    types: dict[str, DerivedType] = field(default_factory=dict)
    uses: list[Use] = field(default_factory=list)
    implicit: dict[str, NumType] | None = None  # None: inherit (or default at top)
    opaque: bool = False  # INCLUDE or unknown imports: undeclared names are unknown
    result_name: str | None = None
    import_at: int | None = None  # offset of the line after the unit header or its last USE
    indent: str = ""
    seen_executable: bool = False

    def symbol(self, name: str) -> Symbol:
        found = self.symbols.get(name)
        if found is None:
            found = self.symbols[name] = Symbol(name)
        return found

    def set_implicit(self, mapping: dict[str, NumType] | None) -> None:
        """mapping None means IMPLICIT NONE."""
        if mapping is None:
            self.implicit = {}
            return
        base = dict(self.effective_implicit())
        base.update(mapping)
        self.implicit = base

    def effective_implicit(self) -> dict[str, NumType]:
        scope: Scope | None = self
        while scope is not None:
            if scope.implicit is not None:
                return scope.implicit
            if scope.kind == "interface-body":
                return _DEFAULT_IMPLICIT
            scope = scope.parent
        return _DEFAULT_IMPLICIT


class Program:
    """All scopes of one file (plus modules known from other files of the batch)."""

    def __init__(self, known_modules: dict[str, Scope] | None = None):
        self.file = Scope("file", "", None)
        self.modules: dict[str, Scope] = dict(known_modules or {})
        self.procedures: dict[str, Symbol] = {}  # external procedures defined in this file


_MISSING = object()
RUNTIME_MODULE = "samebits_runtime"  # ours: its functions are typed by intrinsics.result_type

# intrinsic modules export named constants and procedures only: a USE of them hides nothing
# that typing needs, so names go on to the host and to implicit typing
INTRINSIC_MODULES = {"iso_fortran_env", "iso_c_binding", "ieee_arithmetic", "ieee_exceptions",
                     "ieee_features", "omp_lib", "omp_lib_kinds", RUNTIME_MODULE}


def _host(scope: Scope) -> Scope | None:
    if scope.kind == "interface-body":
        return None
    return scope.parent


class Resolver:
    """Types of names at one scope; implements ``expr.Resolver``."""

    def __init__(self, program: Program, scope: Scope, intrinsic_result):
        self.program = program
        self.scope = scope
        self.intrinsic_result = intrinsic_result
        self.unknown_names: list[str] = []

    # -- lookup ----------------------------------------------------------------------------
    def _module_lookup(self, module: str, name: str, seen: set[str]):
        scope = self.program.modules.get(module)
        if scope is None or module in seen:
            return _MISSING
        seen = seen | {module}
        return self._lookup_in(scope, name, seen, follow_host=False)

    def _lookup_in(self, scope: Scope | None, name: str, seen: set[str], follow_host: bool = True):
        while scope is not None:
            if name in scope.symbols:
                return scope.symbols[name]
            for use in scope.uses:
                if use.only is not None:
                    if name not in use.only:
                        continue
                    remote = use.only[name]
                else:
                    if name in use.renames.values() and name not in use.renames:
                        continue
                    remote = use.renames.get(name, name)
                if use.module in INTRINSIC_MODULES and use.module not in self.program.modules:
                    continue
                found = self._module_lookup(use.module, remote, seen)
                if found is _MISSING:
                    if use.module not in self.program.modules:
                        return _MISSING
                    if use.only is not None:
                        return _MISSING
                    continue
                if found is not None:
                    return found
            if scope.opaque:
                return _MISSING
            if not follow_host:
                return None
            scope = _host(scope)
        return None

    def lookup(self, name: str):
        return self._lookup_in(self.scope, name, set())

    def implicit_type(self, name: str) -> NumType:
        mapping = self.scope.effective_implicit()
        return mapping.get(name[0], UNKNOWN) if name[0].isalpha() else UNKNOWN

    def _unknown(self, name: str) -> NumType:
        self.unknown_names.append(name)
        return UNKNOWN

    # -- expr.Resolver -----------------------------------------------------------------------
    def name_type(self, name: str) -> NumType:
        found = self.lookup(name)
        if found is _MISSING:
            return self._unknown(name)
        if found is not None and found.type is not None:
            return found.type
        if found is not None and found.is_function and found.type is None:
            return self._unknown(name)
        result = self.implicit_type(name)
        return result if result.is_known else self._unknown(name)

    def reference_type(self, name: str, arguments: list[Argument]) -> NumType:
        found = self.lookup(name)
        if found is _MISSING:
            return self._unknown(name)
        if found is not None and not found.is_intrinsic:
            if found.type is not None:
                return found.type
            if found.is_function:
                return self._unknown(name)
            result = self.implicit_type(name)
            return result if result.is_known else self._unknown(name)
        external = self.program.procedures.get(name)
        if found is None and external is not None:
            if external.type is not None:
                return external.type
            return self._unknown(name)
        intrinsic = self.intrinsic_result(name, arguments)
        if intrinsic is not None:
            return intrinsic if intrinsic.is_known else self._unknown(name)
        if found is not None and found.is_intrinsic:
            return self._unknown(name)
        result = self.implicit_type(name)
        return result if result.is_known else self._unknown(name)

    def is_variable(self, name: str) -> bool:
        """True when ``name(...)`` is an array element or substring, not a function reference."""
        found = self.lookup(name)
        if not isinstance(found, Symbol) or found.is_function or found.is_intrinsic:
            return False
        return found.is_array or (found.type is not None and found.type.category is Category.CHARACTER)

    def rank_of(self, name: str) -> int:
        found = self.lookup(name)
        return found.rank if isinstance(found, Symbol) else 0

    def intrinsic_name(self, name: str) -> str | None:
        """``name`` when a reference to it here means the intrinsic (nothing shadows it)."""
        found = self.lookup(name)
        if found is _MISSING:
            return None
        if found is None:
            if name in self.program.procedures:
                return None
        elif not found.is_intrinsic:
            return None
        return name if self.intrinsic_result(name, []) is not None else None

    def component_type(self, base: NumType, component: str) -> NumType:
        if base.category is Category.COMPLEX and component in ("re", "im"):
            return NumType(Category.REAL, base.kind)
        if base.category is not Category.DERIVED or base.kind is None:
            return self._unknown(component)
        derived = self.find_type(base.kind)
        seen = set()
        while derived is not None and derived.name not in seen:
            seen.add(derived.name)
            symbol = derived.components.get(component)
            if symbol is not None:
                return symbol.type if symbol.type is not None else self._unknown(component)
            derived = self.find_type(derived.parent) if derived.parent else None
        return self._unknown(component)

    def find_type(self, name: str) -> DerivedType | None:
        scope: Scope | None = self.scope
        while scope is not None:
            if name in scope.types:
                return scope.types[name]
            for use in scope.uses:
                remote = use.only.get(name) if use.only is not None else use.renames.get(name, name)
                if remote is None:
                    continue
                module = self.program.modules.get(use.module)
                if module is not None:
                    found = Resolver(self.program, module, self.intrinsic_result).find_type(remote)
                    if found is not None:
                        return found
            scope = scope.parent
        return None
