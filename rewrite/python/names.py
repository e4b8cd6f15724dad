"""Scopes of a Python module: what each name is bound to, and qualified names of imports.

``np.sum``, ``numpy.sum`` and ``from numpy import sum as npsum`` all qualify to
``numpy.sum``; a built-in that the code does not rebind qualifies to ``builtins.<name>``. A
name the code binds itself (assignment, parameter, loop target, ...) is a variable and has no
qualified name; a ``from ... import *`` makes every unbound name unknown.
"""
from __future__ import annotations

import builtins
from dataclasses import dataclass, field

import libcst as cst

_BUILTINS = frozenset(dir(builtins))


@dataclass
class Binding:
    """One place that gives a name a value: ``value`` is the expression assigned (None when the
    value is not an expression of its own), ``how`` says which kind of binding it is."""

    how: str  # assign | annotated | augmented | for | parameter | walrus | other
    value: cst.BaseExpression | None = None
    annotation: cst.BaseExpression | None = None
    operator: str = ""  # for augmented assignments
    unpack: tuple[int, ...] = ()  # position inside a tuple target, outermost first


@dataclass
class Scope:
    """A module, function or lambda scope (class bodies are not enclosing scopes in Python)."""

    node: cst.CSTNode
    parent: "Scope | None"
    imports: dict[str, str] = field(default_factory=dict)  # local name -> qualified name
    bindings: dict[str, list[Binding]] = field(default_factory=dict)
    declared_outer: set[str] = field(default_factory=set)  # global / nonlocal names
    star: bool = False
    returns: dict[str, cst.BaseExpression] = field(default_factory=dict)  # function name -> return annotation

    def bind(self, name: str, binding: Binding) -> None:
        self.bindings.setdefault(name, []).append(binding)

    def owner(self, name: str) -> "Scope | None":
        """The scope whose binding or import a name refers to, or None (built-in or unbound)."""
        scope: Scope | None = self
        while scope is not None:
            if name in scope.declared_outer:
                scope = scope.parent
                continue
            if name in scope.bindings or name in scope.imports:
                return scope
            scope = scope.parent
        return None

    def star_imported(self) -> bool:
        scope: Scope | None = self
        while scope is not None:
            if scope.star:
                return True
            scope = scope.parent
        return False

    def qualify(self, node: cst.BaseExpression) -> str | None:
        """The qualified name of a name or attribute chain that refers to an import or a
        built-in (``np.add.reduce`` -> ``numpy.add.reduce``), else None."""
        if isinstance(node, cst.Name):
            owner = self.owner(node.value)
            if owner is not None:
                if node.value in owner.imports and node.value not in owner.bindings:
                    return owner.imports[node.value]
                return None
            if self.star_imported():
                return None
            return f"builtins.{node.value}" if node.value in _BUILTINS else None
        if isinstance(node, cst.Attribute):
            base = self.qualify(node.value)
            if base is None or base.startswith("builtins."):
                return None
            return f"{base}.{node.attr.value}"
        return None

    def function_return(self, name: str) -> cst.BaseExpression | None:
        scope: Scope | None = self
        while scope is not None:
            if name in scope.returns:
                return scope.returns[name]
            if name in scope.bindings or name in scope.imports:
                return None
            scope = scope.parent
        return None


def _dotted(node: cst.BaseExpression) -> str:
    if isinstance(node, cst.Name):
        return node.value
    if isinstance(node, cst.Attribute):
        return f"{_dotted(node.value)}.{node.attr.value}"
    return ""


def _target_names(target: cst.BaseExpression, path: tuple[int, ...] = ()):
    """(name, position in the tuple target) for every name a target binds."""
    if isinstance(target, cst.Name):
        yield target.value, path
    elif isinstance(target, (cst.Tuple, cst.List)):
        for index, element in enumerate(target.elements):
            value = element.value
            if isinstance(element, cst.StarredElement):
                yield from ((name, ()) for name, _ in _target_names(value))
            else:
                yield from _target_names(value, path + (index,))
    elif isinstance(target, cst.StarredElement):
        yield from ((name, ()) for name, _ in _target_names(target.value))


class _Collector(cst.CSTVisitor):
    """Builds the scopes of a module in one pass."""

    def __init__(self, module: cst.Module):
        self.module_scope = Scope(module, None)
        self.stack = [self.module_scope]
        self.scopes: dict[cst.CSTNode, Scope] = {module: self.module_scope}
        self.classes = 0

    @property
    def scope(self) -> Scope:
        return self.stack[-1]

    # -- scopes --------------------------------------------------------------------------
    def visit_FunctionDef(self, node: cst.FunctionDef) -> None:
        self.scope.bind(node.name.value, Binding("other"))
        if node.returns is not None:
            self.scope.returns[node.name.value] = node.returns.annotation
        scope = Scope(node, self._enclosing())
        self.scopes[node] = scope
        for param in _all_params(node.params):
            starred = param is node.params.star_arg or param is node.params.star_kwarg
            annotation = param.annotation.annotation if param.annotation and not starred else None
            scope.bind(param.name.value, Binding("parameter", None, annotation))
        self.stack.append(scope)

    def leave_FunctionDef(self, original_node: cst.FunctionDef) -> None:
        self.stack.pop()

    def visit_Lambda(self, node: cst.Lambda) -> None:
        scope = Scope(node, self._enclosing())
        self.scopes[node] = scope
        for param in _all_params(node.params):
            scope.bind(param.name.value, Binding("parameter"))
        self.stack.append(scope)

    def leave_Lambda(self, original_node: cst.Lambda) -> None:
        self.stack.pop()

    def visit_ClassDef(self, node: cst.ClassDef) -> None:
        self.scope.bind(node.name.value, Binding("other"))
        scope = Scope(node, self._enclosing())  # its names are not visible in its methods
        scope.parent = self.scope
        self.scopes[node] = scope
        self.stack.append(scope)

    def leave_ClassDef(self, original_node: cst.ClassDef) -> None:
        self.stack.pop()

    def _enclosing(self) -> Scope:
        for scope in reversed(self.stack):
            if not isinstance(scope.node, cst.ClassDef):
                return scope
        return self.module_scope

    # -- imports -------------------------------------------------------------------------
    def visit_Import(self, node: cst.Import) -> None:
        for alias in node.names:
            dotted = _dotted(alias.name)
            if alias.asname is not None and isinstance(alias.asname.name, cst.Name):
                self.scope.imports[alias.asname.name.value] = dotted
            else:
                first = dotted.split(".")[0]
                self.scope.imports[first] = first

    def visit_ImportFrom(self, node: cst.ImportFrom) -> None:
        if node.relative or node.module is None:
            base = None
        else:
            base = _dotted(node.module)
        if isinstance(node.names, cst.ImportStar):
            self.scope.star = True
            return
        for alias in node.names:
            local = alias.asname.name.value if alias.asname and isinstance(alias.asname.name, cst.Name) \
                else _dotted(alias.name)
            if base is None:
                self.scope.bind(local, Binding("other"))
            else:
                self.scope.imports[local] = f"{base}.{_dotted(alias.name)}"

    # -- bindings ------------------------------------------------------------------------
    def visit_Assign(self, node: cst.Assign) -> None:
        for target in node.targets:
            self._bind_target(target.target, Binding("assign", node.value))

    def visit_AnnAssign(self, node: cst.AnnAssign) -> None:
        self._bind_target(node.target, Binding("annotated", node.value, node.annotation.annotation))

    def visit_AugAssign(self, node: cst.AugAssign) -> None:
        operator = node.operator.__class__.__name__
        self._bind_target(node.target, Binding("augmented", node.value, operator=operator))

    def visit_For(self, node: cst.For) -> None:
        self._bind_target(node.target, Binding("for", node.iter))

    def visit_NamedExpr(self, node: cst.NamedExpr) -> None:
        self._bind_target(node.target, Binding("walrus", node.value))

    def visit_WithItem(self, node: cst.WithItem) -> None:
        if node.asname is not None:
            self._bind_target(node.asname.name, Binding("other"))

    def visit_ExceptHandler(self, node: cst.ExceptHandler) -> None:
        if node.name is not None:
            self._bind_target(node.name.name, Binding("other"))

    def visit_MatchAs(self, node: cst.MatchAs) -> None:
        if node.name is not None:
            self.scope.bind(node.name.value, Binding("other"))

    def visit_MatchStar(self, node: cst.MatchStar) -> None:
        if node.name is not None:
            self.scope.bind(node.name.value, Binding("other"))

    def visit_Global(self, node: cst.Global) -> None:
        self.scope.declared_outer.update(n.name.value for n in node.names)

    def visit_Nonlocal(self, node: cst.Nonlocal) -> None:
        self.scope.declared_outer.update(n.name.value for n in node.names)

    def visit_CompFor(self, node: cst.CompFor) -> None:
        return None  # comprehension targets are typed by the front end where they are used

    def _bind_target(self, target: cst.BaseExpression, binding: Binding) -> None:
        if isinstance(target, (cst.Attribute, cst.Subscript)):
            return
        for name, path in _target_names(target):
            if path:
                self.scope.bind(name, Binding(binding.how, binding.value, binding.annotation, binding.operator,
                                              path))
            elif isinstance(target, cst.Name):
                self.scope.bind(name, binding)
            else:
                self.scope.bind(name, Binding("other"))


def _all_params(params: cst.Parameters):
    yield from params.posonly_params
    yield from params.params
    if isinstance(params.star_arg, cst.Param):
        yield params.star_arg
    yield from params.kwonly_params
    if params.star_kwarg is not None:
        yield params.star_kwarg


def scopes_of(module: cst.Module) -> dict[cst.CSTNode, Scope]:
    """Every scope of the module, keyed by its node (the module, functions, lambdas, classes)."""
    collector = _Collector(module)
    module.visit(collector)
    return collector.scopes
