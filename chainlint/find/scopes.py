"""The scopes of a module and every binding in each: what `bindings.py` resolves names against.

Collected once, lazily, from the module's `ast`: per function, lambda, class and the module, the
names bound there and how (a plain assignment keeps its value; loops, imports, `with`, `del`,
augmented assignment, mutating method calls and writes from nested scopes are recorded as such).
"""

from __future__ import annotations

import ast
from dataclasses import dataclass, field


@dataclass
class Scope:
    """One scope: where each name is bound in it, its parameters, its declarations."""

    node: ast.AST
    kind: str  # module, function, class
    parent: Scope | None
    bindings: dict[str, list[tuple[str, ast.AST | None]]] = field(default_factory=dict)
    parameters: dict[str, ast.arg] = field(default_factory=dict)
    defaults: dict[str, ast.expr] = field(default_factory=dict)
    declared_global: set[str] = field(default_factory=set)
    declared_nonlocal: set[str] = field(default_factory=set)
    star: bool = False

    def bind(self, name: str, how: str, value: ast.AST | None = None) -> None:
        self.bindings.setdefault(name, []).append((how, value))

    def local(self, name: str) -> bool:
        if name in self.declared_global or name in self.declared_nonlocal:
            return False
        return name in self.bindings or name in self.parameters


class ScopeTable:
    """Every scope of one module by the id of its node, built on the first question."""

    def __init__(self, tree: ast.Module) -> None:
        self.tree = tree
        self._scopes: dict[int, Scope] | None = None
        self._modules: dict[str, str] = {}
        self._outside_writes: list[tuple[Scope, str]] = []

    def scopes(self) -> dict[int, Scope]:
        if self._scopes is None:
            self._scopes = {}
            module = Scope(self.tree, "module", None)
            self._scopes[id(self.tree)] = module
            _Collector(self, module).body(self.tree.body)
            for inner, name in self._outside_writes:
                _written_from_inside(self, inner, name)
        return self._scopes

    def scope(self, node: ast.AST | None) -> Scope:
        scopes = self.scopes()
        return scopes.get(id(node), scopes[id(self.tree)]) if node is not None else scopes[id(self.tree)]


def parameters(arguments: ast.arguments) -> list[ast.arg]:
    """A function's parameters as a scope records them: those a call fills by position or
    name (`*args` and `**kwargs` are bindings of their own)."""
    return arguments.posonlyargs + arguments.args + arguments.kwonlyargs


def _written_from_inside(bindings: ScopeTable, inner: Scope, name: str) -> None:
    """A nested function's `global`/`nonlocal` write rebinds the name where it lives."""
    if name in inner.declared_global:
        target: Scope | None = bindings.scope(None)
    else:
        target = inner.parent
        while target is not None and (target.kind == "class" or not target.local(name)):
            target = target.parent
    if target is not None:
        target.bind(name, "a write from a nested function")


class _Collector:
    """Record every binding of one scope, and of the scopes inside it."""

    def __init__(self, bindings: ScopeTable, scope: Scope) -> None:
        self.owner = bindings
        self.scope = scope

    def body(self, statements: list[ast.stmt]) -> None:
        for statement in statements:
            self.statement(statement)

    def nested(self, node: ast.AST, kind: str) -> Scope:
        scope = Scope(node, kind, self.scope)
        self.owner.scopes()[id(node)] = scope
        return scope

    def statement(self, node: ast.stmt) -> None:
        scope = self.scope
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            for expr in [*node.decorator_list, *node.args.defaults, *(d for d in node.args.kw_defaults if d)]:
                self.expression(expr)
            scope.bind(node.name, "a definition")
            self.function(node, node.args, node.body)
            return
        if isinstance(node, ast.ClassDef):
            for expr in [*node.decorator_list, *node.bases, *(k.value for k in node.keywords)]:
                self.expression(expr)
            scope.bind(node.name, "a definition")
            _Collector(self.owner, self.nested(node, "class")).body(node.body)
            return
        if isinstance(node, ast.Assign):
            self.expression(node.value)
            for target in node.targets:
                if isinstance(target, ast.Name):
                    scope.bind(target.id, "assign", node.value)
                else:
                    self.target(target, "unpacking")
            return
        if isinstance(node, ast.AnnAssign):
            if node.value is not None:
                self.expression(node.value)
                if isinstance(node.target, ast.Name):
                    scope.bind(node.target.id, "assign", node.value)
                    return
            if not isinstance(node.target, ast.Name):
                self.target(node.target, "assignment")
            return
        if isinstance(node, ast.AugAssign):
            self.expression(node.value)
            self.target(node.target, "augmented assignment")
            return
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            for alias in node.names:
                if alias.name == "*":
                    scope.star = True
                    continue
                bound = alias.asname or alias.name.split(".")[0]
                scope.bind(bound, "an import")
                if isinstance(node, ast.Import):
                    self.owner._modules[f"{id(scope.node)}:{bound}"] = alias.name if alias.asname else bound
                elif node.module and not node.level:
                    self.owner._modules[f"{id(scope.node)}:{bound}:from"] = f"{node.module}:{alias.name}"
            return
        if isinstance(node, ast.Global):
            scope.declared_global.update(node.names)
            return
        if isinstance(node, ast.Nonlocal):
            scope.declared_nonlocal.update(node.names)
            return
        if isinstance(node, (ast.For, ast.AsyncFor)):
            self.target(node.target, "a loop")
        elif isinstance(node, (ast.With, ast.AsyncWith)):
            for item in node.items:
                if item.optional_vars is not None:
                    self.target(item.optional_vars, "`with`")
        elif isinstance(node, ast.Delete):
            for target in node.targets:
                self.target(target, "`del`")
        elif isinstance(node, ast.Try) or type(node).__name__ == "TryStar":
            for handler in node.handlers:  # type: ignore[attr-defined]
                if handler.name:
                    scope.bind(handler.name, "`except`")
        elif isinstance(node, ast.Match):
            for case in node.cases:
                for sub in ast.walk(case.pattern):
                    for attribute in ("name", "rest"):
                        bound = getattr(sub, attribute, None)
                        if isinstance(bound, str):
                            scope.bind(bound, "`match`")
        for child in ast.iter_child_nodes(node):
            if isinstance(child, ast.stmt):
                self.statement(child)
            elif isinstance(child, ast.expr):
                self.expression(child)
            elif isinstance(child, (ast.excepthandler, ast.match_case, ast.withitem)):
                for inner in ast.iter_child_nodes(child):
                    if isinstance(inner, ast.stmt):
                        self.statement(inner)
                    elif isinstance(inner, ast.expr):
                        self.expression(inner)

    def function(self, node: ast.AST, arguments: ast.arguments, body: list[ast.stmt] | ast.expr) -> None:
        scope = self.nested(node, "function")
        positional = arguments.posonlyargs + arguments.args
        for argument in parameters(arguments):
            scope.parameters[argument.arg] = argument
        for argument, default in zip(positional[len(positional) - len(arguments.defaults):], arguments.defaults):
            scope.defaults[argument.arg] = default
        for argument, default in zip(arguments.kwonlyargs, arguments.kw_defaults):
            if default is not None:
                scope.defaults[argument.arg] = default
        for extra in (arguments.vararg, arguments.kwarg):
            if extra is not None:
                scope.bind(extra.arg, "`*` parameters")
        collector = _Collector(self.owner, scope)
        if isinstance(body, list):
            collector.body(body)
        else:
            collector.expression(body)
        for name in scope.declared_global | scope.declared_nonlocal:
            if name in scope.bindings:
                self.owner._outside_writes.append((scope, name))

    def target(self, target: ast.expr, how: str) -> None:
        """Bind the names a target assigns; an item or attribute assigned changes its owner."""
        if isinstance(target, ast.Name):
            self.scope.bind(target.id, how)
        elif isinstance(target, (ast.Tuple, ast.List)):
            for element in target.elts:
                self.target(element, how)
        elif isinstance(target, ast.Starred):
            self.target(target.value, how)
        elif isinstance(target, (ast.Subscript, ast.Attribute)):
            root = target.value
            while isinstance(root, (ast.Subscript, ast.Attribute)):
                root = root.value
            if isinstance(root, ast.Name):
                self.scope.bind(root.id, "an item or attribute assignment")
            self.expression(target)

    def expression(self, expr: ast.expr) -> None:
        stack: list[ast.AST] = [expr]
        while stack:
            node = stack.pop()
            if isinstance(node, ast.Lambda):
                for default in [*node.args.defaults, *(d for d in node.args.kw_defaults if d)]:
                    stack.append(default)
                self.function(node, node.args, node.body)
                continue
            if isinstance(node, ast.NamedExpr):
                self.scope.bind(node.target.id, "`:=`")
            elif isinstance(node, ast.comprehension):
                # Comprehension variables are counted against the enclosing scope: conservative.
                self.target(node.target, "a comprehension")
            elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
                receiver = node.func.value
                if isinstance(receiver, ast.Name) and node.func.attr in _MUTATORS:
                    self.scope.bind(receiver.id, f"`.{node.func.attr}()`")
            stack.extend(ast.iter_child_nodes(node))


#: Methods that change a list, set or dict in place.
_MUTATORS = frozenset({
    "append", "extend", "insert", "remove", "pop", "clear", "sort", "reverse", "add", "discard",
    "update", "setdefault", "popitem", "__setitem__", "__delitem__", "__iadd__",
})


def nested_children(node: ast.AST) -> list[tuple[ast.AST, bool]]:
    """The child nodes of `node`, each with whether it runs in a comprehension's own scope (all of
    a comprehension but its first iterable, as a nested function does)."""
    if not isinstance(node, (ast.ListComp, ast.SetComp, ast.GeneratorExp, ast.DictComp)):
        return [(child, False) for child in ast.iter_child_nodes(node)]
    parts: list[ast.AST] = [node.key, node.value] if isinstance(node, ast.DictComp) else [node.elt]
    for generator in node.generators:
        parts += [generator.iter, *generator.ifs]
    return [(part, part is not node.generators[0].iter) for part in parts]
