"""Float-ness of Python expressions: from literals, annotations, numpy calls and ufuncs, and the
assignments of the same scope. Nothing is guessed: what cannot be told stays unknown.

A ``PyType`` is an element type (``NumType``: integer, real, complex, ...) and a shape:
"scalar", "array" (a numpy array), "sequence" (a list, tuple or other iterable of that element
type) or "unknown". numpy float dtypes give kinds "float64" / "float32"; a Python float is real
with no kind (binary64).
"""
from __future__ import annotations

from dataclasses import dataclass

import libcst as cst

from ..ir import CHARACTER, INTEGER, LOGICAL, REAL, UNKNOWN, Category, NumType, arithmetic_type
from .names import Binding, Scope
from .render import RUNTIME_MODULE as RUNTIME

COMPLEX = NumType(Category.COMPLEX)


@dataclass(frozen=True)
class PyType:
    element: NumType
    shape: str = "scalar"  # scalar | array | sequence | rng | unknown

    @property
    def known(self) -> bool:
        return self.element.is_known


NOTHING = PyType(UNKNOWN, "unknown")
RNG = PyType(UNKNOWN, "rng")


def scalar(element: NumType) -> PyType:
    return PyType(element, "scalar")


def array(element: NumType) -> PyType:
    return PyType(element, "array")


def merge(types: list[PyType]) -> PyType:
    """The type of a name bound several times (or of the branches of a conditional)."""
    if not types:
        return NOTHING
    first = types[0]
    if all(t == first for t in types):
        return first
    if any(not t.known for t in types):
        return NOTHING
    categories = {t.element.category for t in types}
    shapes = {t.shape for t in types}
    if categories <= {Category.INTEGER, Category.REAL} and Category.REAL in categories:
        kinds = {t.element.kind for t in types if t.element.category is Category.REAL}
        shape = "array" if "array" in shapes else (shapes.pop() if len(shapes) == 1 else "unknown")
        return PyType(NumType(Category.REAL, kinds.pop() if len(kinds) == 1 else None), shape)
    return NOTHING


# -- numpy and the standard library ------------------------------------------------------------
_NUMPY_DTYPES = {
    "float64": NumType(Category.REAL, "float64"), "double": NumType(Category.REAL, "float64"),
    "float_": NumType(Category.REAL, "float64"), "float32": NumType(Category.REAL, "float32"),
    "single": NumType(Category.REAL, "float32"), "complex128": COMPLEX, "complex64": COMPLEX,
    "cdouble": COMPLEX, "csingle": COMPLEX, "complex_": COMPLEX,
    "int8": INTEGER, "int16": INTEGER, "int32": INTEGER, "int64": INTEGER, "intp": INTEGER,
    "uint8": INTEGER, "uint16": INTEGER, "uint32": INTEGER, "uint64": INTEGER, "int_": INTEGER,
    "bool_": LOGICAL,
}
_STRING_DTYPES = {"float64": "float64", "f8": "float64", "d": "float64", "float": "float64", "double": "float64",
                  "float32": "float32", "f4": "float32", "f": "float32", "single": "float32"}
_BUILTIN_TYPES = {"float": REAL, "int": INTEGER, "complex": COMPLEX, "bool": LOGICAL, "str": CHARACTER}
_SEQUENCES = {"builtins.list", "builtins.tuple", "builtins.set", "builtins.frozenset", "typing.List",
              "typing.Tuple", "typing.Sequence", "typing.Iterable", "typing.Collection", "typing.Set",
              "typing.FrozenSet", "typing.Iterator", "collections.abc.Sequence", "collections.abc.Iterable",
              "collections.abc.Collection", "collections.abc.Iterator"}

# numpy functions whose result is floating for real or integer input (complex in, complex out)
FLOATING_UFUNCS = set("""sqrt cbrt exp exp2 expm1 log log2 log10 log1p sin cos tan arcsin arccos arctan
arctan2 sinh cosh tanh arcsinh arccosh arctanh hypot deg2rad rad2deg degrees radians float_power
true_divide divide mean average std var median nanmean nanstd nanvar nanmedian interp trapz trapezoid
sinc i0 logaddexp logaddexp2""".split())
# numpy functions whose result has the element type of their (first real) argument
SAME_TYPE = set("""abs absolute fabs negative positive square minimum maximum fmin fmax clip floor ceil
trunc rint round around fix sign copysign cumsum cumprod nancumsum diff sort transpose reshape ravel
squeeze flip fliplr flipud roll concatenate stack vstack hstack column_stack dstack tile repeat
atleast_1d atleast_2d where sum nansum prod nanprod min max amin amax nanmin nanmax ptp dot matmul
inner outer vdot tensordot einsum kron cross add subtract multiply power mod fmod remainder
nan_to_num real imag conj conjugate copy ascontiguousarray asfortranarray broadcast_to
pad take choose select percentile quantile nanpercentile nanquantile""".split())
_CONSTRUCTORS = set("zeros ones empty full linspace logspace geomspace eye identity".split())
_LIKE = set("zeros_like ones_like empty_like full_like".split())
_RANDOM = set("""rand randn random random_sample normal uniform standard_normal exponential gamma beta
lognormal standard_exponential standard_gamma laplace logistic rayleigh triangular weibull
chisquare vonmises wald gumbel pareto power f standard_t standard_cauchy""".split())
_REDUCTIONS = set("sum nansum prod nanprod min max amin amax nanmin nanmax mean average std var median "
                  "nanmean nanstd nanvar nanmedian ptp percentile quantile".split())
_ARRAY_METHODS_SAME = set("copy reshape ravel flatten transpose squeeze clip cumsum cumprod round "
                          "conj conjugate repeat swapaxes".split())
_ARRAY_METHODS_REDUCE = set("sum prod min max mean std var ptp".split())
_MATH_INTEGER = set("floor ceil trunc factorial comb perm gcd lcm isqrt".split())
_MATH_LOGICAL = set("isnan isinf isfinite isclose".split())


class Typer:
    """Types of the expressions of one module, from its scopes."""

    def __init__(self, scopes: dict[cst.CSTNode, Scope]):
        self.scopes = scopes
        self._names: dict[tuple[int, str], PyType] = {}
        self._busy: set[tuple[int, str]] = set()
        self._memo: dict[int, PyType] = {}  # expression types once no name is being decided

    # -- names -------------------------------------------------------------------------------
    def name(self, name: str, scope: Scope, local: dict[str, PyType] | None = None) -> PyType:
        if local and name in local:
            return local[name]
        if name in ("True", "False"):
            return scalar(LOGICAL)
        owner = scope.owner(name)
        if owner is None or name not in owner.bindings:
            return NOTHING
        key = (id(owner), name)
        if key in self._names:
            return self._names[key]
        if key in self._busy:
            return NOTHING  # a binding that depends on itself (x = x + dt): decided by the others
        self._busy.add(key)
        try:
            bindings = owner.bindings[name]
            annotated = [b for b in bindings if b.annotation is not None]
            if annotated:
                result = merge([self.annotation(b.annotation, owner) for b in annotated])
            else:
                found = [t for t in (self._binding(b, name, owner) for b in bindings) if t is not None]
                result = merge(found)
        finally:
            self._busy.discard(key)
        self._names[key] = result
        return result

    def _binding(self, binding: Binding, name: str, scope: Scope) -> PyType | None:
        if binding.how in ("assign", "walrus"):
            value = _unpack(binding.value, binding.unpack)
            if value is None:
                return NOTHING
            return self.expression(value, scope)
        if binding.how == "for":
            if binding.unpack:
                return self._for_unpacked(binding, scope)
            return self.element(self.expression(binding.value, scope), binding.value, scope)
        if binding.how == "augmented":
            # x += v keeps x's type unless v widens it; an integer v never decides it
            value = self.expression(binding.value, scope)
            if value.element.category is Category.INTEGER and value.shape == "scalar":
                return None
            return value if value.element.category in (Category.REAL, Category.COMPLEX) else NOTHING
        return NOTHING

    def _for_unpacked(self, binding: Binding, scope: Scope) -> PyType:
        """``for i, x in enumerate(xs)`` and ``for a, b in zip(xs, ys)``."""
        iterable = binding.value
        if isinstance(iterable, cst.Call) and len(binding.unpack) == 1:
            function = scope.qualify(iterable.func)
            args = [a.value for a in iterable.args if a.keyword is None and not a.star]
            index = binding.unpack[0]
            if function == "builtins.enumerate" and args:
                if index == 0:
                    return scalar(INTEGER)
                return self.element(self.expression(args[0], scope), args[0], scope)
            if function == "builtins.zip" and index < len(args):
                return self.element(self.expression(args[index], scope), args[index], scope)
        return NOTHING

    def element(self, container: PyType, node: cst.BaseExpression | None, scope: Scope) -> PyType:
        """What iterating over a value gives."""
        if isinstance(node, cst.Call) and scope.qualify(node.func) == "builtins.range":
            return scalar(INTEGER)
        if container.shape == "sequence":
            return scalar(container.element)
        if container.shape == "array":
            return PyType(container.element, "array")  # a row, or a numpy scalar: both act as arrays
        return NOTHING

    # -- annotations -------------------------------------------------------------------------
    def annotation(self, node: cst.BaseExpression, scope: Scope) -> PyType:
        if isinstance(node, cst.Name) and node.value in _BUILTIN_TYPES and scope.qualify(node) is not None:
            return scalar(_BUILTIN_TYPES[node.value])
        qualified = scope.qualify(node) if isinstance(node, (cst.Name, cst.Attribute)) else None
        if qualified:
            if qualified.startswith("numpy.") and qualified[6:] in _NUMPY_DTYPES:
                return scalar(_NUMPY_DTYPES[qualified[6:]])
            if qualified == "numpy.ndarray":
                return array(UNKNOWN)
            return NOTHING
        if isinstance(node, cst.Subscript):
            base = scope.qualify(node.value)
            items = [e.slice.value for e in node.slice if isinstance(e.slice, cst.Index)]
            if base == "numpy.typing.NDArray" and items:
                inner = self.annotation(items[0], scope)
                return array(inner.element if inner.shape == "scalar" else UNKNOWN)
            if base == "numpy.ndarray" and len(items) == 2 and isinstance(items[1], cst.Subscript):
                dtype = [e.slice.value for e in items[1].slice if isinstance(e.slice, cst.Index)]
                inner = self.annotation(dtype[0], scope) if dtype else NOTHING
                return array(inner.element if inner.shape == "scalar" else UNKNOWN)
            if base in _SEQUENCES and items:
                inner = [self.annotation(item, scope) for item in items
                         if not isinstance(item, cst.Ellipsis)]
                element = merge(inner)
                return PyType(element.element, "sequence") if element.shape == "scalar" else NOTHING
        return NOTHING

    # -- expressions -------------------------------------------------------------------------
    def expression(self, node: cst.BaseExpression | None, scope: Scope,
                   local: dict[str, PyType] | None = None) -> PyType:
        if node is None:
            return NOTHING
        final = local is None and not self._busy
        if final and id(node) in self._memo:
            return self._memo[id(node)]
        method = getattr(self, f"_{type(node).__name__}", None)
        result = method(node, scope, local) if method else NOTHING
        if final:
            self._memo[id(node)] = result
        return result

    def _Integer(self, node, scope, local):
        return scalar(INTEGER)

    def _Float(self, node, scope, local):
        return scalar(REAL)

    def _Imaginary(self, node, scope, local):
        return scalar(COMPLEX)

    def _SimpleString(self, node, scope, local):
        return scalar(CHARACTER)

    _ConcatenatedString = _FormattedString = _SimpleString

    def _Name(self, node, scope, local):
        return self.name(node.value, scope, local)

    def _Attribute(self, node, scope, local):
        qualified = scope.qualify(node)
        if qualified in ("math.pi", "math.e", "math.tau", "math.inf", "math.nan", "numpy.pi", "numpy.e",
                         "numpy.inf", "numpy.nan", "numpy.euler_gamma"):
            return scalar(REAL)
        if qualified is not None:
            return NOTHING
        base = self.expression(node.value, scope, local)
        attribute = node.attr.value
        if base.shape == "array":
            if attribute in ("T", "real", "flat"):
                return base if attribute != "real" else array(_real_of(base.element))
            if attribute in ("size", "ndim", "itemsize", "nbytes"):
                return scalar(INTEGER)
            if attribute == "shape":
                return PyType(INTEGER, "sequence")
        return NOTHING

    def _Subscript(self, node, scope, local):
        base = self.expression(node.value, scope, local)
        if base.shape == "array":
            return base
        if base.shape == "sequence":
            if any(isinstance(e.slice, cst.Slice) for e in node.slice):
                return base
            return scalar(base.element)
        return NOTHING

    def _BinaryOperation(self, node, scope, local):
        left = self.expression(node.left, scope, local)
        right = self.expression(node.right, scope, local)
        return binary(type(node.operator).__name__, left, right, node.right)

    def _UnaryOperation(self, node, scope, local):
        operand = self.expression(node.expression, scope, local)
        if isinstance(node.operator, cst.Not):
            return scalar(LOGICAL)
        if isinstance(node.operator, cst.BitInvert):
            return operand if operand.element.category is Category.INTEGER else NOTHING
        return operand if operand.element.category in (Category.INTEGER, Category.REAL, Category.COMPLEX) \
            else NOTHING

    def _Comparison(self, node, scope, local):
        return scalar(LOGICAL)

    def _IfExp(self, node, scope, local):
        return merge([self.expression(node.body, scope, local), self.expression(node.orelse, scope, local)])

    def _NamedExpr(self, node, scope, local):
        return self.expression(node.value, scope, local)

    def _List(self, node, scope, local):
        if not node.elements or any(isinstance(e, cst.StarredElement) for e in node.elements):
            return NOTHING
        element = merge([self.expression(e.value, scope, local) for e in node.elements])
        return PyType(element.element, "sequence") if element.shape == "scalar" else NOTHING

    _Tuple = _Set = _List

    def _ListComp(self, node, scope, local):
        inner = self.comprehension_names(node.for_in, scope, local)
        element = self.expression(node.elt, scope, inner)
        return PyType(element.element, "sequence") if element.shape == "scalar" else NOTHING

    _GeneratorExp = _SetComp = _ListComp

    def comprehension_names(self, for_in: cst.CompFor, scope: Scope,
                            local: dict[str, PyType] | None) -> dict[str, PyType]:
        """Types of the targets of a comprehension's ``for`` clauses."""
        names = dict(local or {})
        clause: cst.CompFor | None = for_in
        while clause is not None:
            iterable = self.expression(clause.iter, scope, names)
            if isinstance(clause.target, cst.Name):
                names[clause.target.value] = self.element(iterable, clause.iter, scope)
            else:
                for element in _flat_names(clause.target):
                    names[element] = NOTHING
                if isinstance(clause.iter, cst.Call) and isinstance(clause.target, cst.Tuple):
                    function = scope.qualify(clause.iter.func)
                    args = [a.value for a in clause.iter.args if a.keyword is None and not a.star]
                    targets = [e.value for e in clause.target.elements]
                    if function == "builtins.zip" and len(args) == len(targets):
                        for target, arg in zip(targets, args):
                            if isinstance(target, cst.Name):
                                names[target.value] = self.element(self.expression(arg, scope, names), arg, scope)
                    elif function == "builtins.enumerate" and len(targets) == 2 and args:
                        if isinstance(targets[0], cst.Name):
                            names[targets[0].value] = scalar(INTEGER)
                        if isinstance(targets[1], cst.Name):
                            names[targets[1].value] = self.element(self.expression(args[0], scope, names),
                                                                   args[0], scope)
            clause = clause.inner_for_in
        return names

    def _Call(self, node, scope, local):
        function = scope.qualify(node.func) if isinstance(node.func, (cst.Name, cst.Attribute)) else None
        positional = [a.value for a in node.args if a.keyword is None and not a.star]
        keywords = {a.keyword.value: a.value for a in node.args if a.keyword is not None}
        if function is None:
            if isinstance(node.func, cst.Attribute):
                return self._method(node, scope, local, positional, keywords)
            if isinstance(node.func, cst.Name):
                returns = scope.function_return(node.func.value)
                if returns is not None:
                    return self.annotation(returns, scope)
            return NOTHING
        if function.startswith("builtins."):
            return self._builtin(function[9:], positional, scope, local)
        if function.startswith("math."):
            name = function[5:]
            if name in _MATH_INTEGER:
                return scalar(INTEGER)
            if name in _MATH_LOGICAL:
                return scalar(LOGICAL)
            return scalar(REAL)
        if function.startswith("numpy."):
            return self._numpy(function[6:], positional, keywords, scope, local)
        if function.startswith(RUNTIME + "."):
            return self._runtime(function[len(RUNTIME) + 1:], positional, keywords, scope, local)
        return NOTHING

    def _runtime(self, name, positional, keywords, scope, local):
        """What samebits' own runtime returns (its docstrings): the input's float precision for
        arrays, float64 for iterables; a scalar without ``axis``."""
        if name not in ("exact_sum", "exact_mean", "exact_reduce", "exact_dot") or not positional:
            return NOTHING
        first = self.expression(positional[0], scope, local)
        if first.element.category not in (Category.INTEGER, Category.REAL):
            return NOTHING
        kind = first.element.kind if first.shape == "array" and first.element.category is Category.REAL else None
        by_axis = "axis" in keywords or (len(positional) > 1 and name != "exact_dot")  # as for np.add.reduce
        return PyType(NumType(Category.REAL, kind), "array" if by_axis else "scalar")

    def _builtin(self, name, positional, scope, local):
        args = [self.expression(a, scope, local) for a in positional]
        if name in _BUILTIN_TYPES and name != "bool" and name != "str":
            return scalar(_BUILTIN_TYPES[name])
        if name == "len":
            return scalar(INTEGER)
        if name == "abs" and args:
            return args[0] if args[0].shape == "scalar" else NOTHING
        if name == "round":
            return scalar(INTEGER) if len(args) == 1 else (args[0] if args else NOTHING)
        if name in ("sum", "min", "max") and args:
            if len(args) == 1:
                return self.element(args[0], positional[0], scope)
            if name == "sum":
                return NOTHING
            if all(a.shape == "scalar" for a in args):
                return merge(args)
            return NOTHING
        if name in ("list", "tuple", "sorted", "reversed") and args:
            element = self.element(args[0], positional[0], scope)
            return PyType(element.element, "sequence") if element.shape == "scalar" else NOTHING
        if name == "range":
            return PyType(INTEGER, "sequence")
        return NOTHING

    def _dtype(self, node: cst.BaseExpression | None, scope: Scope) -> NumType | None:
        if node is None:
            return None
        if isinstance(node, cst.SimpleString):
            kind = _STRING_DTYPES.get(node.evaluated_value if isinstance(node.evaluated_value, str) else "")
            return NumType(Category.REAL, kind) if kind else UNKNOWN
        if isinstance(node, cst.Name) and node.value in _BUILTIN_TYPES and scope.qualify(node):
            return REAL if node.value == "float" else _BUILTIN_TYPES[node.value]
        qualified = scope.qualify(node) if isinstance(node, (cst.Name, cst.Attribute)) else None
        if qualified and qualified.startswith("numpy.") and qualified[6:] in _NUMPY_DTYPES:
            return _NUMPY_DTYPES[qualified[6:]]
        return UNKNOWN

    def _numpy(self, name, positional, keywords, scope, local):
        dtype = self._dtype(keywords.get("dtype"), scope)
        args = [self.expression(a, scope, local) for a in positional]
        first = args[0] if args else NOTHING
        if name in _NUMPY_DTYPES and _NUMPY_DTYPES[name].is_known:
            return scalar(_NUMPY_DTYPES[name])
        if name in _CONSTRUCTORS:
            if name == "full" and dtype is None:
                fill = args[1] if len(args) > 1 else self.expression(keywords.get("fill_value"), scope, local)
                return array(fill.element) if fill.shape == "scalar" else NOTHING
            return array(dtype if dtype is not None else REAL)
        if name in _LIKE:
            return array(dtype if dtype is not None else first.element)
        if name == "arange":
            if dtype is not None:
                return array(dtype)
            if all(a.element.category is Category.INTEGER for a in args) and args:
                return array(INTEGER)
            return array(REAL) if all(a.element.category in (Category.INTEGER, Category.REAL) for a in args) \
                and args else NOTHING
        if name in ("array", "asarray", "asanyarray", "ascontiguousarray", "asfortranarray", "copy"):
            if dtype is not None:
                return array(dtype)
            return array(first.element) if first.shape in ("sequence", "array", "scalar") else NOTHING
        if name.startswith("random."):
            short = name[7:]
            if short == "default_rng":
                return RNG
            if short in _RANDOM:
                return array(REAL)
            return NOTHING
        if name in FLOATING_UFUNCS:
            category = first.element.category
            shape = "array" if first.shape in ("array", "sequence") else first.shape
            if name in ("mean", "average", "std", "var", "median", "nanmean", "nanstd", "nanvar", "nanmedian"):
                shape = "scalar" if "axis" not in keywords and len(positional) < 2 else "array"
            if category in (Category.INTEGER, Category.REAL):
                kind = first.element.kind if category is Category.REAL else None
                return PyType(NumType(Category.REAL, kind), shape)
            if category is Category.COMPLEX:
                return PyType(COMPLEX, shape)
            return NOTHING
        if name in SAME_TYPE or name.startswith("add.") or name.startswith("multiply."):
            real = [a for a in args if a.known]
            if name == "where":
                real = args[1:]
            if not real or any(not a.known for a in (args[1:] if name == "where" else args)):
                return NOTHING
            element = real[0].element
            for other in real[1:]:
                element = arithmetic_type(element, other.element)
            if name in _REDUCTIONS or name in ("add.reduce", "vdot", "inner"):
                shape = "scalar" if "axis" not in keywords and len(positional) < 2 else "array"
            else:
                shape = "array"
            return PyType(element, shape) if element.is_known else NOTHING
        return NOTHING

    def _method(self, node, scope, local, positional, keywords):
        receiver = self.expression(node.func.value, scope, local)
        method = node.func.attr.value
        if receiver.shape == "rng":
            return array(REAL) if method in _RANDOM or method == "random" else NOTHING
        if receiver.shape != "array":
            return NOTHING
        if method in _ARRAY_METHODS_SAME:
            return receiver
        if method in _ARRAY_METHODS_REDUCE:
            shape = "scalar" if "axis" not in keywords and not positional else "array"
            element = receiver.element
            if method in ("mean", "std", "var") and element.category is Category.INTEGER:
                element = REAL
            return PyType(element, shape)
        if method == "astype" and positional:
            dtype = self._dtype(positional[0], scope)
            return array(dtype) if dtype is not None else NOTHING
        if method == "item":
            return scalar(receiver.element)
        if method == "tolist":
            return PyType(receiver.element, "sequence")
        if method == "dot" and positional:
            other = self.expression(positional[0], scope, local)
            element = arithmetic_type(receiver.element, other.element)
            return array(element) if element.is_known else NOTHING
        return NOTHING


def binary(operator: str, left: PyType, right: PyType, right_node=None) -> PyType:
    """The type of a binary operation, by Python's and numpy's rules for numbers."""
    numeric = (Category.INTEGER, Category.REAL, Category.COMPLEX)
    if left.element.category not in numeric or right.element.category not in numeric:
        return NOTHING
    if left.shape not in ("scalar", "array") or right.shape not in ("scalar", "array"):
        return NOTHING
    shape = "array" if "array" in (left.shape, right.shape) else "scalar"
    element = arithmetic_type(left.element, right.element)
    if operator == "Divide" and element.category is Category.INTEGER:
        element = REAL
    if operator == "Power" and element.category is Category.INTEGER:
        if not (isinstance(right_node, cst.Integer)):
            return NOTHING  # a negative integer exponent gives a float
    if operator in ("BitAnd", "BitOr", "BitXor", "LeftShift", "RightShift") and element.category is not \
            Category.INTEGER:
        return NOTHING
    if operator == "MatrixMultiply":
        shape = "array"
    if element.category is Category.REAL and element.kind is None:
        kinds = [t.element.kind for t in (left, right) if t.element.kind]
        element = NumType(Category.REAL, kinds[0]) if kinds else element
    return PyType(element, shape)


def _real_of(element: NumType) -> NumType:
    return REAL if element.category is Category.COMPLEX else element


def _unpack(value: cst.BaseExpression | None, path: tuple[int, ...]) -> cst.BaseExpression | None:
    for index in path:
        if not isinstance(value, (cst.Tuple, cst.List)) or index >= len(value.elements) \
                or any(isinstance(e, cst.StarredElement) for e in value.elements):
            return None
        value = value.elements[index].value
    return value


def _flat_names(target: cst.BaseExpression):
    if isinstance(target, cst.Name):
        yield target.value
    elif isinstance(target, (cst.Tuple, cst.List)):
        for element in target.elements:
            yield from _flat_names(element.value)
    elif isinstance(target, cst.StarredElement):
        yield from _flat_names(target.value)
