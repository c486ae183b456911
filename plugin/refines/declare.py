"""The user-facing declarations: ``@refines`` and ``old``.

This module must stay import-light: user modules import it at load time, and
the pytest plugin imports it for projects that have no specs at all.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Optional, TypeVar

F = TypeVar("F", bound=Callable[..., Any])

#: Attribute under which the specs of a function are stored, innermost first.
SPECS_ATTRIBUTE = "__refines__"
#: Module global under which ``attach`` records the specs a module attaches.
ATTACHED_ATTRIBUTE = "__refines_attached__"


@dataclass(frozen=True)
class Spec:
    """One ``@refines`` obligation, as written by the user (runtime objects)."""

    relation: Callable[..., Any]
    assuming: Optional[Callable[..., Any]] = None
    raises: Mapping[type, Callable[..., Any]] = field(default_factory=dict)


def refines(
    relation: Callable[..., Any],
    *,
    assuming: Optional[Callable[..., Any]] = None,
    raises: Optional[Mapping[type, Callable[..., Any]]] = None,
) -> Callable[[F], F]:
    """Declare that the decorated function refines ``relation``.

    ``relation`` is a lambda (or a ``def`` returning one expression) whose
    parameters are some of the function's parameters plus ``result``. It is
    read in the post-state: ``result`` is the return value and a parameter
    name is that argument as it is after the call; ``old(expr)`` is ``expr``
    evaluated before the call.

    ``assuming`` is the precondition: a lambda over some of the parameters.
    Only pre-states that satisfy it are considered.

    ``raises`` maps exception classes to conditions over the parameters
    (pre-state). When a condition holds, the function must raise that class
    or a subclass; when none holds it must return normally and satisfy
    ``relation``. Any other exception refutes the spec.

    The decorator returns the function itself: there is no cost at call time.
    Stacked ``@refines`` decorators are independent obligations.
    """
    spec = _spec("@refines", relation, assuming, raises)

    def add(fn: F) -> F:
        specs = list(getattr(fn, SPECS_ATTRIBUTE, ()))
        specs.append(spec)
        # Stored on the function itself so that the decorator adds no wrapper.
        setattr(fn, SPECS_ATTRIBUTE, tuple(specs))
        return fn

    return add


def _spec(what: str, relation, assuming, raises) -> Spec:
    """Check the arguments of a declaration and bundle them."""
    if not callable(relation):
        raise TypeError(
            f"{what} expects a lambda or function as its relation, got {relation!r}")
    if assuming is not None and not callable(assuming):
        raise TypeError(
            f"{what}(assuming=...) expects a lambda or function, got {assuming!r}")
    raises_map = dict(raises or {})
    for cls, condition in raises_map.items():
        if not (isinstance(cls, type) and issubclass(cls, BaseException)):
            raise TypeError(
                f"{what}(raises=...) keys must be exception classes, got {cls!r}")
        if not callable(condition):
            raise TypeError(
                f"{what}(raises=...) values must be lambdas over the parameters, "
                f"got {condition!r} for {cls.__name__}")
    return Spec(relation=relation, assuming=assuming, raises=raises_map)


@dataclass(frozen=True)
class Attached:
    """A spec attached by ``attach`` to a function defined elsewhere."""

    target: Callable[..., Any]
    spec: Spec
    path: str  # the file that called attach
    line: int  # the line of that call
    hints: Mapping[str, Any] = field(default_factory=dict)

    @property
    def qualname(self) -> str:
        t = self.target
        return getattr(t, "__qualname__", None) or getattr(t, "__name__", None) or repr(t)

    @property
    def module(self) -> str:
        """The target's module; a method of a builtin type has it on its class."""
        t = self.target
        return (getattr(t, "__module__", None)
                or getattr(getattr(t, "__objclass__", None), "__module__", None) or "builtins")

    @property
    def function(self) -> str:
        """``<module>.<qualname>``, as reports and node ids name the target."""
        return f"{self.module}.{self.qualname}"


def attach(
    func: Callable[..., Any],
    relation: Callable[..., Any],
    *,
    assuming: Optional[Callable[..., Any]] = None,
    raises: Optional[Mapping[type, Callable[..., Any]]] = None,
    hints: Optional[Mapping[str, Any]] = None,
) -> None:
    """Attach a spec to ``func``, a function you cannot edit (from the standard
    library or another package), as ``@refines`` would.

    Call it at module level in a file under the refines paths; the check is
    one item of that file. ``relation``, ``assuming`` and ``raises`` read as in
    ``@refines``, over ``func``'s parameter names. ``hints`` gives a type for
    parameters that have no type hint (``hints={"year": int}``): the prover
    and the tester need one to know which values to consider.

    ``func``'s source is read when it has Python source; a function without
    it (a builtin written in C) is checked by testing. Nothing about ``func``
    changes: the spec is recorded in the attaching module.
    """
    if not callable(func):
        raise TypeError(f"attach expects a function as its first argument, got {func!r}")
    spec = _spec("attach", relation, assuming, raises)
    hints_map = dict(hints or {})
    for name in hints_map:
        if not isinstance(name, str):
            raise TypeError(f"attach(hints=...) keys must be parameter names, got {name!r}")
    frame = sys._getframe(1)
    if frame.f_code.co_name != "<module>":
        raise TypeError(
            f"attach(...) must be called at module level (it was called in "
            f"{frame.f_code.co_name}() at {frame.f_code.co_filename}:{frame.f_lineno}), "
            f"so that the file's checks are known when pytest collects it")
    frame.f_globals.setdefault(ATTACHED_ATTRIBUTE, []).append(Attached(
        target=func, spec=spec, path=frame.f_code.co_filename, line=frame.f_lineno,
        hints=hints_map))


def old(value: Any) -> Any:
    """The pre-state value of ``value`` inside a relation.

    The prover reads ``old(expr)`` from the source: ``expr`` is evaluated
    before the call. When a relation is evaluated at run time (to replay a
    counterexample, or by the tester), each ``old(expr)`` is read from the
    source too and evaluated on copies of the arguments taken before the call;
    called directly, ``old`` is the identity.
    """
    return value
