"""Errors, and the one table of messages users see for them.

Two kinds of problem stop a proof:

* ``Untranslatable`` -- the code uses something the translator does not model
  yet. The obligation ends ``unknown`` with the construct and line named.
  Raising it is the only road from the translator to that verdict.
* ``SpecError`` -- the spec itself is malformed (a relation naming a parameter
  the function does not have, a ``raises`` key that is not a class, ...). The
  obligation ends ``error`` with file:line.

Every message lives in ``MESSAGES`` with a minimal snippet that triggers it;
``tests/test_errors.py`` checks each row, so a message cannot rot unseen.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Dict, Optional


@dataclass(frozen=True)
class Message:
    text: str  # what went wrong; ``{name}`` fields are filled in
    hint: str  # what to do about it
    snippet: str  # a minimal module that triggers it (checked by the tests)
    kind: str  # "unsupported" (-> unknown) or "spec" (-> error)


MESSAGES: Dict[str, Message] = {
    # ---- constructs the translator does not model yet: verdict ``unknown``
    "statement": Message(
        "`{construct}` statements are not translated yet",
        "supported statements: assignment, augmented assignment, if/elif/else, "
        "for and while loops (with break, continue and else), return, raise, "
        "assert, pass",
        "@refines(lambda n, result: result >= 0)\n"
        "def f(n: int) -> int:\n    try:\n        return 10 // n\n"
        "    except ZeroDivisionError:\n        return 0\n",
        "unsupported",
    ),
    "expression": Message(
        "`{construct}` expressions are not translated yet",
        "supported: int, bool and float arithmetic (+ - * / // %, ** on ints with "
        "a constant exponent), str (+, * by an int, indexing, slicing, in, "
        "comparisons, len, str and the methods listed in the docs), comparisons, "
        "and/or/not, conditional expressions, tuples, lists of int/bool/str "
        "(displays, indexing, slices, +, in, ==, len), annotated attributes of "
        "objects, abs/min/max/int/bool/float/len/str/list/isinstance and "
        "math.isnan/isinf/isfinite/fabs/sqrt/floor/ceil/copysign",
        "@refines(lambda x, result: result >= 0)\n"
        "def f(x: int) -> int:\n    return x.real\n",
        "unsupported",
    ),
    "call": Message(
        "calls to `{callee}` are not translated yet",
        "the builtins abs, min, max, int, bool, float, len, str, list, isinstance, "
        "the math functions isnan, isinf, isfinite, fabs, sqrt, floor, ceil, "
        "copysign and the str and list methods listed in the docs are modelled; "
        "calls to your own functions, classes and methods stand for a value of their "
        "return annotation; other callables only on a line of their own (result unused)",
        "@refines(lambda x, result: result >= 0)\n"
        "def f(x: float) -> int:\n    return round(x)\n",
        "unsupported",
    ),
    "method": Message(
        "the method `{method}` is not translated yet",
        "the methods modelled are {allowed} (startswith/endswith take one argument)",
        "@refines(lambda code, result: len(result) == len(code))\n"
        "def f(code: str) -> bytes:\n    return code.encode()\n",
        "unsupported",
    ),
    "attribute": Message(
        "the attribute `{attr}` of `{cls}` is not modelled: {why}",
        "objects are modelled through their annotated int, bool, float and str "
        "attributes (dataclass fields, or class-level annotations)",
        "from dataclasses import dataclass\n\n@dataclass\nclass Rope:\n"
        "    length: int\n    tags: list\n\n"
        "@refines(lambda r, result: True)\n"
        "def f(r: Rope) -> int:\n    return len(r.tags)\n",
        "unsupported",
    ),
    "operator": Message(
        "the operator `{op}` is not translated for {types}",
        "{hint}",
        "@refines(lambda x, y, result: result >= 0)\n"
        "def f(x: float, y: float) -> float:\n    return x ** y\n",
        "unsupported",
    ),
    "opaque-type": Message(
        "the result of `{construct}` is used, but {why}, so the translator has no "
        "value to stand for it",
        "annotate the callee's return type with int, bool, float, str, None, "
        "Optional[...] of one of them, a tuple of these, list[int] (bool, float, "
        "str), or a class with annotated attributes and no subclasses; or use the "
        "call on a line of its own",
        "def grade(points):\n    return points // 10\n\n"
        "@refines(lambda x, result: result >= 0)\n"
        "def f(x: int) -> int:\n    return grade(x)\n",
        "unsupported",
    ),
    "power": Message(
        "`**` is translated only for an int base and a constant exponent "
        "0 <= e <= 64, not `{construct}`",
        "a negative exponent gives a float, which is not modelled yet",
        "@refines(lambda x, n, result: result >= 0)\n"
        "def f(x: int, n: int) -> int:\n    return x ** n\n",
        "unsupported",
    ),
    "value": Message(
        "the value `{construct}` of type {type} is not modelled yet",
        "this release models int, bool, float, str (code points up to U+1FFFF in "
        "constants), tuples, lists, objects with annotated attributes, and None",
        "@refines(lambda x, result: result == x)\n"
        "def f(x: int) -> bytes:\n    return b'crimp'\n",
        "unsupported",
    ),
    "param-type": Message(
        "parameter `{name}` has the type hint `{hint_text}`, which is not modelled yet",
        "this release proves functions whose parameters are annotated `int`, "
        "`bool`, `float`, `str`, `Optional[...]` of one of them, a list of one of "
        "them (`list[int]`, ...), or a class with annotated attributes",
        "@refines(lambda s, result: result == s)\n"
        "def f(s: bytes) -> bytes:\n    return s\n",
        "unsupported",
    ),
    "param-untyped": Message(
        "parameter `{name}` has no type hint; the hint says which values to prove for",
        "annotate it: `int`, `bool`, `float`, `str`, `Optional[...]` of one of them, "
        "a list of one of them (`list[int]`, ...), or a class with annotated attributes",
        "@refines(lambda s, result: result == s)\n"
        "def f(s):\n    return s\n",
        "unsupported",
    ),
    "name": Message(
        "the name `{name}` is not a parameter, a local assigned before this "
        "line, or a module-level int/bool/float/str constant",
        "module constants must be assigned once at module level to an int, bool, "
        "float or str",
        "GRADES = ['5a', '6b']\n\n@refines(lambda x, result: result == x)\n"
        "def f(x: int) -> int:\n    return GREETING\n",
        "unsupported",
    ),
    "mixed": Message(
        "`{construct}` holds values of different shapes on different paths ({shapes})",
        "give the variable one type (int/bool, float, str, or tuples of one length) "
        "on every path",
        "@refines(lambda x, result: True)\n"
        "def f(x: int):\n    if x > 0:\n        y = (1, 2)\n    else:\n        y = 3\n"
        "    return y\n",
        "unsupported",
    ),
    "signature": Message(
        "the parameter kind `{construct}` is not supported yet",
        "use plain positional-or-keyword or keyword-only parameters",
        "@refines(lambda result: result >= 0)\n"
        "def f(*args: int) -> int:\n    return 0\n",
        "unsupported",
    ),
    "async": Message(
        "`{qualname}` is an async function; coroutines are not proved yet",
        "specify a synchronous helper that holds the logic, and call it from the coroutine",
        "@refines(lambda x, result: result == x)\n"
        "async def f(x: int) -> int:\n    return x\n",
        "unsupported",
    ),
    "wrapped": Message(
        "the @refines spec on `{qualname}` sits above another decorator, so it "
        "describes the wrapper that decorator returns, which is not translated",
        "put @refines directly above `def` (below the other decorators); the proof "
        "then covers the function as written, not what the decorators add",
        "import functools\n\ndef logged(fn):\n    @functools.wraps(fn)\n"
        "    def wrapper(*args, **kwargs):\n        return fn(*args, **kwargs)\n"
        "    return wrapper\n\n@refines(lambda x, result: result == x)\n@logged\n"
        "def f(x: int) -> int:\n    return x\n",
        "unsupported",
    ),
    "nested": Message(
        "`{qualname}` is defined inside another function or a nested class; only "
        "module-level functions and methods of module-level classes are proved "
        "in this release",
        "move the function to module level",
        "class Fleet:\n    class Boat:\n        @staticmethod\n"
        "        @refines(lambda x, result: result == x)\n"
        "        def f(x: int) -> int:\n            return x\n\n"
        "launch = Fleet.Boat.f\n",
        "unsupported",
    ),
    "no-source": Message(
        "`{qualname}` has no Python source to translate: {why}",
        "it is checked by testing; a proof needs a function written in Python",
        "from math import isqrt\n\n"
        "attach(isqrt, lambda n, result: result * result <= n,\n"
        "       assuming=lambda n: n >= 0, hints={'n': int})\n",
        "unsupported",
    ),
    "attach-signature": Message(
        "the parameters of `{qualname}` cannot be read ({why})",
        "attach a spec to a function whose signature inspect.signature can read, or "
        "wrap the call in a function of your own with named, annotated parameters",
        "attach(max, lambda result: True)\n",
        "unsupported",
    ),
    # ---- malformed specs: verdict ``error``
    "spec-form": Message(
        "the {role} must be a lambda or a def that returns one expression",
        "write it as `lambda <names>: <expression>`",
        "def rel(x, result):\n    y = x\n    return result == y\n\n"
        "@refines(rel)\ndef f(x: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-names": Message(
        "the {role} names `{name}`, which is not {allowed_what}",
        "allowed names: {allowed}",
        "@refines(lambda y, result: result == y)\n"
        "def f(x: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-old": Message(
        "`old(...)` takes exactly one expression and may only appear in the relation",
        "write `old(x)` inside the relation; assuming= and raises= already "
        "read the pre-state",
        "@refines(lambda x, result: result == x, assuming=lambda x: old(x) > 0)\n"
        "def f(x: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-raises": Message(
        "raises= must be a dict literal from exception classes to lambdas",
        "write it as `raises={{ValueError: lambda qty: qty < 0}}`",
        "CONDITIONS = {ValueError: lambda x: x < 0}\n\n"
        "@refines(lambda x, result: result == x, raises=CONDITIONS)\n"
        "def f(x: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-raising": Message(
        "the {role} itself raises {exception} for {inputs}",
        "guard it, e.g. `y != 0 and x // y > 1` (and/or short-circuit as in Python)",
        "@refines(lambda x, y, result: True, assuming=lambda x, y: x // y > 0)\n"
        "def f(x: int, y: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-value": Message(
        "the {role} has the value `{construct}`, which is not a bool",
        "a {role} is a condition: write a comparison or a combination of them",
        "@refines(lambda x, result: (result, x))\n"
        "def f(x: int) -> int:\n    return x\n",
        "spec",
    ),
    "spec-result-param": Message(
        "the function has a parameter named `result`, which the relation "
        "reserves for the return value",
        "rename the parameter (e.g. `outcome`)",
        "@refines(lambda result: result >= 0)\n"
        "def f(result: int) -> int:\n    return result\n",
        "spec",
    ),
    "spec-decorators": Message(
        "found {runtime} @refines specs on `{qualname}` at run time but {source} "
        "`@refines(...)` decorators in its source",
        "apply @refines directly as a decorator, `@refines(...)` or `@refines.refines(...)`",
        "from refines import refines as r\n\ndef f(x: int) -> int:\n    return x\n\n"
        "f = r(lambda x, result: result == x)(f)\n",
        "spec",
    ),
}


def format_message(key: str, **fields: object) -> tuple:
    """Return ``(text, hint)`` for ``key`` with the fields filled in."""
    msg = MESSAGES[key]
    return msg.text.format(**fields), msg.hint.format(**fields)


@dataclass
class Untranslatable(Exception):
    """A construct the translator does not model (the obligation is tested
    instead of proved; ``unknown`` when it cannot be tested either)."""

    key: str
    line: int
    fields: Dict[str, object] = field(default_factory=dict)
    path: Optional[str] = None  # the file of ``line``, when it is not the spec's file

    def __post_init__(self) -> None:
        super().__init__(self.text)

    @property
    def text(self) -> str:
        return format_message(self.key, **self.fields)[0]

    @property
    def hint(self) -> str:
        return format_message(self.key, **self.fields)[1]


@dataclass
class SpecError(Exception):
    """A malformed spec (verdict ``error``)."""

    key: str
    line: int
    fields: Dict[str, object] = field(default_factory=dict)
    path: Optional[str] = None

    def __post_init__(self) -> None:
        super().__init__(self.text)

    @property
    def text(self) -> str:
        return format_message(self.key, **self.fields)[0]

    @property
    def hint(self) -> str:
        return format_message(self.key, **self.fields)[1]
