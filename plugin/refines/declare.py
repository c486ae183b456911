"""The user-facing declarations: ``@refines`` and ``old``.

This module must stay import-light: user modules import it at load time, and
the pytest plugin imports it for projects that have no specs at all.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Optional, TypeVar

F = TypeVar("F", bound=Callable[..., Any])

#: Attribute under which the specs of a function are stored, innermost first.
SPECS_ATTRIBUTE = "__refines__"


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
    if not callable(relation):
        raise TypeError(
            f"@refines expects a lambda or function as its relation, got {relation!r}"
        )
    if assuming is not None and not callable(assuming):
        raise TypeError(
            f"@refines(assuming=...) expects a lambda or function, got {assuming!r}"
        )
    raises_map = dict(raises or {})
    for cls, condition in raises_map.items():
        if not (isinstance(cls, type) and issubclass(cls, BaseException)):
            raise TypeError(
                f"@refines(raises=...) keys must be exception classes, got {cls!r}"
            )
        if not callable(condition):
            raise TypeError(
                f"@refines(raises=...) values must be lambdas over the parameters, "
                f"got {condition!r} for {cls.__name__}"
            )
    spec = Spec(relation=relation, assuming=assuming, raises=raises_map)

    def attach(fn: F) -> F:
        specs = list(getattr(fn, SPECS_ATTRIBUTE, ()))
        specs.append(spec)
        # Stored on the function itself so that the decorator adds no wrapper.
        setattr(fn, SPECS_ATTRIBUTE, tuple(specs))
        return fn

    return attach


def old(value: Any) -> Any:
    """The pre-state value of ``value`` inside a relation.

    The prover reads ``old(expr)`` from the source: ``expr`` is evaluated
    before the call. When a relation is evaluated by running it (to replay a
    counterexample), the arguments it receives are the pre-state values for
    the immutable types supported so far, so ``old`` is the identity there.
    """
    return value
