"""Fit parameters: the stack's dotted names, lmfit's identifiers, and `expr` ties.

lmfit names must be Python identifiers, while lamina names are dotted key
paths (``oxide.thickness_nm``, ``w1.film.material.oscillators.1.center_ev``)
whose layer part may contain ``-``.  `ParameterTable` gives every public name
a safe identifier (``p3_oxide_thickness_nm``) and translates tie expressions
token by token: a token that is a known public name becomes its identifier, a
bare word must be one of a short list of math functions, anything else is a
`LaminaInputError`.  Expressions are then evaluated by asteval (the
restricted interpreter lmfit itself uses), never by Python's eval, and
vectorized: a tie evaluated with (B,) arrays gives a (B,) array, which is how
the batched Jacobian moves tied parameters along with the free ones.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import LaminaInputError
from ..parameters import Param

#: bare words an expression may use (numpy functions inside asteval)
EXPR_FUNCTIONS = frozenset({
    "sqrt", "exp", "log", "log10", "sin", "cos", "tan", "arcsin", "arccos", "arctan",
    "arctan2", "sinh", "cosh", "tanh", "abs", "fabs", "hypot", "minimum", "maximum",
    "where", "radians", "degrees", "pi", "e",
})

_NUMBER = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_WORD = re.compile(r"[A-Za-z_][A-Za-z0-9_]*(?:\.[A-Za-z0-9_-]+)*")
_IDENT_CHAR = re.compile(r"[A-Za-z0-9_.]")


def safe_identifier(index: int, public_name: str) -> str:
    """A unique Python identifier for a dotted name (index keeps it unique)."""
    return f"p{index}_" + re.sub(r"[^A-Za-z0-9_]", "_", public_name)[:60]


@dataclass
class FitParam:
    """One public fit parameter."""

    name: str               # public name, e.g. "oxide.thickness_nm" or "w1.oxide.thickness_nm"
    safe: str               # lmfit identifier
    param: Param            # value, bounds, vary, expr (expr in public names)
    unit: str = ""
    thickness_like: bool = False
    expr_safe: str | None = None    # expr translated to identifiers
    depends_on: tuple = ()          # public names used by expr


@dataclass
class ParameterTable:
    """Every parameter of a (possibly multi-sample) fit, by public name."""

    items: dict[str, FitParam] = field(default_factory=dict)

    # -- building -----------------------------------------------------------------
    def add(self, name: str, param: Param, unit: str = "", thickness_like: bool = False) -> None:
        if name in self.items:
            raise LaminaInputError(f"parameter '{name}' defined twice", name, "unique parameter names")
        self.items[name] = FitParam(name, safe_identifier(len(self.items), name), param, unit or param.unit,
                                    thickness_like)

    def resolve_exprs(self) -> None:
        """Translate every expr to identifiers, check names and order the ties (no cycles)."""
        to_safe = {name: item.safe for name, item in self.items.items()}
        for item in self.items.values():
            if item.param.expr is not None:
                item.expr_safe, item.depends_on = translate_expr(item.param.expr, to_safe, item.name)
        self._tie_order = self._order_ties()

    def _order_ties(self) -> list[str]:
        tied = [n for n, it in self.items.items() if it.param.expr is not None]
        order, done, visiting = [], set(), set()

        def visit(name):
            if name in done:
                return
            if name in visiting:
                raise LaminaInputError(f"the expr of '{name}' depends on itself", f"{name}.expr",
                                       "ties without cycles")
            visiting.add(name)
            for dep in self.items[name].depends_on:
                if self.items[dep].param.expr is not None:
                    visit(dep)
            visiting.discard(name)
            done.add(name)
            order.append(name)

        for name in tied:
            visit(name)
        return order

    # -- views ----------------------------------------------------------------------
    @property
    def free(self) -> list[str]:
        return [n for n, it in self.items.items() if it.param.is_free]

    @property
    def tied(self) -> list[str]:
        return list(getattr(self, "_tie_order", []))

    def start_vector(self) -> np.ndarray:
        return np.array([self.items[n].param.value for n in self.free], dtype=float)

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        lo = np.array([self.items[n].param.min for n in self.free], dtype=float)
        hi = np.array([self.items[n].param.max for n in self.free], dtype=float)
        return lo, hi

    def to_lmfit(self):
        """lmfit.Parameters with safe names: free ones vary within bounds, ties carry expr."""
        import lmfit
        params = lmfit.Parameters()
        # fixed and free first so that every expr finds its symbols
        for item in self.items.values():
            if item.param.expr is None:
                params.add(item.safe, value=item.param.value, min=item.param.min, max=item.param.max,
                           vary=item.param.is_free)
        for name in self.tied:
            item = self.items[name]
            params.add(item.safe, expr=item.expr_safe)
        return params

    # -- values -----------------------------------------------------------------------
    def values(self, free_values: np.ndarray) -> dict[str, object]:
        """Public name -> value for free (given) and tied (evaluated) parameters.

        `free_values` is (F,) or (B, F); ties come back as floats or (B,) arrays.
        """
        free_values = np.asarray(free_values, dtype=float)
        out: dict[str, object] = {}
        for j, name in enumerate(self.free):
            out[name] = free_values[..., j]
        if self.tied:
            out.update(self.evaluate_ties(out))
        return out

    def evaluate_ties(self, free: dict[str, object]) -> dict[str, object]:
        from asteval import Interpreter
        interp = Interpreter(minimal=True, use_numpy=True)
        for name, item in self.items.items():
            value = free.get(name, item.param.value)
            interp.symtable[item.safe] = value
        tied: dict[str, object] = {}
        for name in self.tied:
            item = self.items[name]
            value = interp.eval(item.expr_safe, show_errors=False, raise_errors=False)
            if interp.error or value is None:
                message = interp.error[0].get_error()[1] if interp.error else "no value"
                interp.error = []
                raise LaminaInputError(f"cannot evaluate expr '{item.param.expr}': {message}", f"{name}.expr",
                                       "an arithmetic expression of other parameters")
            value = np.asarray(value, dtype=float)
            interp.symtable[item.safe] = value
            tied[name] = value if value.ndim else float(value)
        return tied


def translate_expr(expr: str, to_safe: dict[str, str], where: str) -> tuple[str, tuple]:
    """Replace dotted public names in `expr` by identifiers; reject unknown names."""
    names = sorted(to_safe, key=len, reverse=True)
    out, used, i = [], [], 0
    while i < len(expr):
        ch = expr[i]
        if ch.isdigit() or (ch == "." and i + 1 < len(expr) and expr[i + 1].isdigit()):
            m = _NUMBER.match(expr, i)
            out.append(m.group(0))
            i = m.end()
            continue
        if ch.isalpha() or ch == "_":
            known = next((n for n in names if expr.startswith(n, i)
                          and (i + len(n) == len(expr) or not _IDENT_CHAR.match(expr[i + len(n)]))), None)
            if known is not None:
                out.append(to_safe[known])
                used.append(known)
                i += len(known)
                continue
            m = _WORD.match(expr, i)
            word = m.group(0)
            if word not in EXPR_FUNCTIONS:
                raise LaminaInputError(f"unknown parameter '{word}' in expr '{expr}'", f"{where}.expr",
                                       "full parameter names (e.g. oxide.thickness_nm) or one of "
                                       + ", ".join(sorted(EXPR_FUNCTIONS)))
            out.append(word)
            i = m.end()
            continue
        if ch in "+-*/(), \t%<>=!":
            out.append(ch)
            i += 1
            continue
        raise LaminaInputError(f"character {ch!r} not allowed in expr '{expr}'", f"{where}.expr",
                               "numbers, parameter names, + - * / ** ( ) and math functions")
    text = "".join(out)
    if re.search(r"(?<![=!<>])=(?!=)", text):
        raise LaminaInputError(f"assignment not allowed in expr '{expr}'", f"{where}.expr", "an expression")
    return text, tuple(dict.fromkeys(used))


def finite_or_none(value):
    """JSON-safe float: NaN and infinities become None."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None
