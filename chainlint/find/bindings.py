"""What a name of the analysed module holds, as far as its code proves it, without running it.

One resolver serves two needs: a filter may treat a free name as a single value (not a Series
realigned by index, not an array whose length must match) only when the code proves it, and a
value the code names (`MIN_TRIP = 45`, `COLS = ["a", "b"]`) is worth knowing for estimation.

Python's scoping rules decide where a name resolves (function scopes outward, class bodies
skipped, `global`/`nonlocal` followed). There, the name is proven when every binding of it in
that scope is a plain assignment of a constant expression (literals, names proven in turn,
arithmetic of them, `len(...)`, a few constructors of single values) and nothing else binds it
(loops, `with`, imports, `del`, augmented assignment, a nested scope writing it). A parameter is
proven a single value by a scalar annotation or a literal default. Everything else is unknown,
with the reason. Built lazily: most files never ask.
"""

from __future__ import annotations

import ast
import math
from dataclasses import dataclass

from chainlint.find.scopes import Scope, ScopeTable

#: Kinds of a resolution, from most to least known.
VALUE = "value"  # a literal value (str, int, float, bool, None) or a tuple of them ("values")
VALUES = "values"  # a list-like of literal values (list, tuple or set literal)
SCALAR = "scalar"  # a single value whose value is not known statically
UNKNOWN = "unknown"

_SCALAR_TYPES = frozenset({
    "int", "float", "str", "bool", "complex", "bytes", "date", "datetime", "time", "timedelta",
    "Timestamp", "Timedelta", "Decimal", "Fraction",
})
#: Functions that return a single value (or raise) whatever their arguments.
_ALWAYS_SCALAR = frozenset({"len", "int", "float", "str", "bool", "repr", "ord", "chr", "hash", "id"})
#: Functions that return a single value when every argument is one.
_SCALAR_OF_SCALARS = frozenset({"abs", "round", "min", "max", "pow", "divmod"})
#: Module attributes that hold one known number.
_MODULE_CONSTANTS = {
    ("numpy", "pi"): math.pi, ("numpy", "e"): math.e, ("numpy", "inf"): math.inf, ("numpy", "nan"): math.nan,
    ("math", "pi"): math.pi, ("math", "e"): math.e, ("math", "tau"): math.tau, ("math", "inf"): math.inf,
    ("math", "nan"): math.nan,
}
#: Calls on modules that return one timestamp, date or duration.
_SCALAR_CALLS = frozenset({
    ("pandas", "Timestamp"), ("pandas", "Timedelta"), ("pandas", "Timestamp.now"), ("pandas", "Timestamp.today"),
    ("pandas", "Timestamp.utcnow"), ("datetime", "datetime"), ("datetime", "date"), ("datetime", "time"),
    ("datetime", "timedelta"), ("datetime", "datetime.now"), ("datetime", "datetime.today"),
    ("datetime", "datetime.utcnow"), ("datetime", "date.today"), ("datetime", "datetime.fromisoformat"),
    ("datetime", "date.fromisoformat"), ("datetime", "datetime.strptime"), ("numpy", "datetime64"),
    ("numpy", "timedelta64"), ("numpy", "float64"), ("numpy", "int64"), ("decimal", "Decimal"),
    ("math", "sqrt"), ("math", "log"), ("math", "exp"), ("math", "floor"), ("math", "ceil"),
})
_MAX_FOLD = 10**12


@dataclass(frozen=True)
class Resolved:
    """`kind` (VALUE, VALUES, SCALAR or UNKNOWN); `value` for VALUE and VALUES; `reason` for UNKNOWN."""

    kind: str
    value: object = None
    reason: str = ""

    @property
    def single(self) -> bool:
        """Proven to be one value (not a Series, array or list)."""
        return self.kind in (VALUE, SCALAR)


def _unknown(reason: str) -> Resolved:
    return Resolved(UNKNOWN, None, reason)


class ModuleBindings(ScopeTable):
    """The scopes of one module, for answering `resolve(name, scope_node)`."""

    def __init__(self, tree: ast.Module) -> None:
        super().__init__(tree)
        self._cache: dict[tuple[int, str], Resolved] = {}
        self._active: set[tuple[int, str]] = set()

    # -- resolving ------------------------------------------------------------------------
    def resolve(self, dotted: str, at: ast.AST | None, nested: bool = False, query: bool = False) -> Resolved:
        """What `dotted` (`limit`, `np.pi`, `self.cap`) holds where code of scope `at` reads it;
        `nested`: read by a lambda or comprehension written in that scope, which does not see a
        class body's names; `query`: read by `DataFrame.query` (`@limit`), which sees only the
        calling frame's own names and the module's, never an enclosing function's."""
        head, _, attribute = dotted.partition(".")
        scope = self.scope(at)
        if query and self._closure(head, scope, nested):
            return _unknown("a name of an enclosing function, which a query's text does not see as the code does")
        if attribute:
            return self._attribute(head, attribute, scope, dotted, nested)
        return self._name(head, scope, nested)

    def _closure(self, name: str, scope: Scope, nested: bool) -> bool:
        """Whether `name` read in `scope` (or a comprehension there) may be an enclosing
        function's: pandas resolves a query's names in the calling frame, which holds an
        enclosing function's names only where its code mentions them (and a comprehension's
        frame is its own up to Python 3.11, its function's from 3.12)."""
        owner = self._owner(name, scope, nested)
        return owner is not None and owner.kind != "module" and (nested or owner is not scope)

    def _attribute(self, head: str, attribute: str, scope: Scope, dotted: str, nested: bool = False) -> Resolved:
        module = self._module_of(head, scope, nested)
        if module is not None and (module, attribute) in _MODULE_CONSTANTS:
            return Resolved(VALUE, _MODULE_CONSTANTS[(module, attribute)])
        return _unknown("an attribute, which may hold anything")

    def _module_of(self, name: str, scope: Scope, nested: bool = False) -> str | None:
        """The module a name is bound to by a plain import, and by nothing else."""
        owner = self._owner(name, scope, nested)
        if owner is None:
            return None
        sites = owner.bindings.get(name, [])
        if len(sites) != 1 or sites[0][0] != "an import" or name in owner.parameters:
            return None
        return self._modules.get(f"{id(owner.node)}:{name}")

    def _owner(self, name: str, scope: Scope, nested: bool = False) -> Scope | None:
        """The scope in which `name`, read in `scope` (or in a lambda there, `nested`), resolves
        (None: a builtin or unbound)."""
        current: Scope | None = scope
        if name in scope.declared_global:
            return self.scope(None) if name in self.scope(None).bindings else None
        first = not nested
        while current is not None:
            if current.kind == "class" and not first:
                current = current.parent
                continue
            if name in current.declared_global:
                module = self.scope(None)
                return module if name in module.bindings else None
            if current.local(name):
                return current
            first = False
            current = current.parent
        return None

    def _name(self, name: str, scope: Scope, nested: bool = False) -> Resolved:
        owner = self._owner(name, scope, nested)
        if owner is None:
            if name in _ALWAYS_SCALAR | _SCALAR_OF_SCALARS:
                return _unknown("a function")
            return _unknown("not bound in this module")
        key = (id(owner.node), name)
        if key in self._cache:
            return self._cache[key]
        if key in self._active:
            return _unknown("defined in terms of itself")
        self._active.add(key)
        try:
            found = self._binding(name, owner)
        finally:
            self._active.discard(key)
        self._cache[key] = found
        return found

    def _binding(self, name: str, owner: Scope) -> Resolved:
        sites = owner.bindings.get(name, [])
        if name in owner.parameters:
            if sites:
                return _unknown("a parameter assigned again in its function")
            return self._parameter(name, owner)
        if owner.star:
            return _unknown("possibly bound by an `import *`")
        values = []
        for how, value in sites:
            if how != "assign" or not isinstance(value, ast.expr):
                return _unknown(f"bound by {how}")
            values.append(self.evaluate(value, owner))
        if not values:
            return _unknown("not bound in this module")
        for found, (_, value) in zip(values, sites):
            if found.kind == UNKNOWN:
                if len(values) > 1:
                    return _unknown(f"assigned {len(values)} times")
                return _unknown(f"assigned from `{_clip(ast.unparse(value))}`")
        if all(v.kind == values[0].kind and v.value == values[0].value for v in values[1:]):
            return values[0]
        if all(v.single for v in values):
            return Resolved(SCALAR)
        return _unknown(f"assigned {len(values)} times")

    def _parameter(self, name: str, owner: Scope) -> Resolved:
        argument = owner.parameters[name]
        if argument.annotation is not None and _scalar_annotation(argument.annotation):
            return Resolved(SCALAR)
        default = owner.defaults.get(name)
        if default is not None and self.evaluate(default, owner.parent or owner).kind == VALUE:
            return Resolved(SCALAR)
        return _unknown("a parameter with no scalar annotation or literal default")

    # -- constant expressions -------------------------------------------------------------
    def evaluate(self, expr: ast.expr, scope: Scope) -> Resolved:
        """What a constant expression evaluates to, in `scope`."""
        if isinstance(expr, ast.Constant):
            if expr.value is None or isinstance(expr.value, (str, int, float, bool)):
                return Resolved(VALUE, expr.value)
            return Resolved(SCALAR)
        if isinstance(expr, ast.Name):
            return self._name(expr.id, scope)
        if isinstance(expr, ast.Attribute):
            dotted = dotted_name(expr)
            if dotted is not None:
                head, _, attribute = dotted.partition(".")
                return self._attribute(head, attribute, scope, dotted)
            return _unknown("an attribute of a computed value")
        if isinstance(expr, (ast.List, ast.Tuple, ast.Set)):
            items = [self.evaluate(e, scope) for e in expr.elts]
            if all(i.kind == VALUE and not isinstance(i.value, tuple) for i in items):
                return Resolved(VALUES, tuple(i.value for i in items))
            return _unknown("a collection of values not all known")
        if isinstance(expr, ast.UnaryOp):
            return self._unary(expr, scope)
        if isinstance(expr, ast.BinOp):
            return self._binary(expr, scope)
        if isinstance(expr, (ast.Compare, ast.BoolOp)):
            parts = [expr.left, *expr.comparators] if isinstance(expr, ast.Compare) else expr.values
            if all(self.evaluate(p, scope).single for p in parts):
                return Resolved(SCALAR)
            return _unknown("a comparison of values not all single")
        if isinstance(expr, ast.IfExp):
            if self.evaluate(expr.body, scope).single and self.evaluate(expr.orelse, scope).single:
                return Resolved(SCALAR)
            return _unknown("a conditional value not proven single")
        if isinstance(expr, ast.JoinedStr):
            return Resolved(SCALAR)
        if isinstance(expr, ast.Call):
            return self._call(expr, scope)
        return _unknown("computed by code chainlint does not evaluate")

    def _unary(self, expr: ast.UnaryOp, scope: Scope) -> Resolved:
        operand = self.evaluate(expr.operand, scope)
        if operand.kind == VALUE and _number(operand.value) and isinstance(expr.op, (ast.USub, ast.UAdd)):
            return Resolved(VALUE, -operand.value if isinstance(expr.op, ast.USub) else operand.value)  # type: ignore[operator]
        if operand.single:
            return Resolved(SCALAR)
        return operand if operand.kind == UNKNOWN else _unknown("an operation on a collection")

    def _binary(self, expr: ast.BinOp, scope: Scope) -> Resolved:
        left, right = self.evaluate(expr.left, scope), self.evaluate(expr.right, scope)
        for side in (left, right):
            if side.kind == UNKNOWN:
                return side
        if not (left.single and right.single):
            return _unknown("arithmetic on a collection")
        if left.kind == VALUE and right.kind == VALUE:
            folded = fold(expr.op, left.value, right.value)
            if folded is not None:
                return Resolved(VALUE, folded)
        return Resolved(SCALAR)

    def _call(self, expr: ast.Call, scope: Scope) -> Resolved:
        func = expr.func
        if isinstance(func, ast.Name) and self._owner(func.id, scope) is None:
            if func.id in _ALWAYS_SCALAR:
                return Resolved(SCALAR)
            arguments = [*expr.args, *(k.value for k in expr.keywords)]
            if func.id in _SCALAR_OF_SCALARS and len(expr.args) >= 2 and all(self.evaluate(a, scope).single for a in arguments):
                return Resolved(SCALAR)
        qualified = self._qualified(func, scope)
        if qualified is not None:
            if qualified in _SCALAR_CALLS:
                return Resolved(SCALAR)
            if qualified == ("pandas", "to_datetime") and len(expr.args) == 1:
                if self.evaluate(expr.args[0], scope).single:
                    return Resolved(SCALAR)
        return _unknown(f"`{_clip(ast.unparse(func))}(...)` may return a Series or an array")

    def _qualified(self, func: ast.expr, scope: Scope) -> tuple[str, str] | None:
        """`("pandas", "Timestamp")` for `pd.Timestamp` (or `Timestamp` imported from pandas)."""
        dotted = dotted_name(func)
        if dotted is None:
            return None
        head, _, rest = dotted.partition(".")
        module = self._module_of(head, scope)
        if module is not None:
            return (module.split(".")[0], rest) if rest else None
        owner = self._owner(head, scope)
        if owner is None or len(owner.bindings.get(head, [])) != 1:
            return None
        origin = self._modules.get(f"{id(owner.node)}:{head}:from")
        if origin is None:
            return None
        module, _, name = origin.partition(":")
        return (module.split(".")[0], name + ("." + rest if rest else ""))


def _scalar_annotation(annotation: ast.expr) -> bool:
    if isinstance(annotation, ast.Constant) and isinstance(annotation.value, str):
        try:
            parsed = ast.parse(annotation.value, mode="eval").body
        except SyntaxError:
            return False
        return _scalar_annotation(parsed)
    if isinstance(annotation, ast.Constant) and annotation.value is None:
        return True
    if isinstance(annotation, ast.Name):
        return annotation.id in _SCALAR_TYPES
    if isinstance(annotation, ast.Attribute):
        return annotation.attr in _SCALAR_TYPES
    if isinstance(annotation, ast.BinOp) and isinstance(annotation.op, ast.BitOr):
        return _scalar_annotation(annotation.left) and _scalar_annotation(annotation.right)
    if isinstance(annotation, ast.Subscript):
        head = annotation.value
        name = head.id if isinstance(head, ast.Name) else head.attr if isinstance(head, ast.Attribute) else ""
        inner = annotation.slice
        parts = inner.elts if isinstance(inner, ast.Tuple) else [inner]
        if name == "Literal":
            return all(isinstance(p, ast.Constant) for p in parts)
        if name in ("Optional", "Union", "Final", "Annotated"):
            return _scalar_annotation(parts[0]) if name == "Annotated" else all(_scalar_annotation(p) for p in parts)
    return False


def _number(value: object) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def fold(op: ast.operator, left: object, right: object) -> object | None:
    """Arithmetic of two literals as Python does it, when it cannot blow up."""
    if isinstance(left, str) and isinstance(right, str) and isinstance(op, ast.Add):
        return left + right
    if not (_number(left) and _number(right)):
        return None
    a, b = left, right
    try:
        if isinstance(op, ast.Add):
            result = a + b  # type: ignore[operator]
        elif isinstance(op, ast.Sub):
            result = a - b  # type: ignore[operator]
        elif isinstance(op, ast.Mult):
            result = a * b  # type: ignore[operator]
        elif isinstance(op, ast.Div):
            result = a / b  # type: ignore[operator]
        elif isinstance(op, ast.FloorDiv):
            result = a // b  # type: ignore[operator]
        elif isinstance(op, ast.Mod):
            result = a % b  # type: ignore[operator]
        elif isinstance(op, ast.Pow) and abs(b) <= 64 and abs(a) <= _MAX_FOLD:  # type: ignore[arg-type, operator]
            result = a ** b  # type: ignore[operator]
        else:
            return None
    except (ZeroDivisionError, OverflowError, ValueError):
        return None
    if isinstance(result, complex) or (isinstance(result, int) and abs(result) > 2**63):
        return None
    return result


def dotted_name(expr: ast.expr) -> str | None:
    """`a.b.c` for a chain of attributes on a name, else None."""
    parts = []
    while isinstance(expr, ast.Attribute):
        parts.append(expr.attr)
        expr = expr.value
    if not isinstance(expr, ast.Name):
        return None
    parts.append(expr.id)
    return ".".join(reversed(parts))


def _clip(text: str, limit: int = 40) -> str:
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 1] + "…"
