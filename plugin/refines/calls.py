"""The calls and methods the translator models: builtins, ``math`` and ``str``.

A mixin of ``translate.Translator``: each ``call_*`` method gets the callee's
name, the translated arguments and the call node, and returns the value of the
call -- adding raising outcomes for the errors Python raises -- or None when
the call is not modelled (the translator then refuses it with a reason).
"""

from __future__ import annotations

import math
import sys

from refines import ir


class Calls:
    """Builtin and library calls, by the rules of their documentation."""

    def type_error(self, node, message: str, value: ir.Value = None) -> ir.Value:
        """Python raises TypeError here on every path; the value is never used."""
        self.raise_when(ir.TRUE, TypeError, node.lineno, message)
        return ir.const(0) if value is None else value

    def call_abs(self, name, args, node):
        if len(args) == 1 and isinstance(args[0], ir.Term):
            if args[0].sort == ir.STR:
                return self.type_error(node, "bad operand type for abs(): 'str'")
            if args[0].sort == ir.FLOAT:
                return ir.op("fabs", args[0], sort=ir.FLOAT)  # abs(-0.0) is 0.0
            x = ir.as_int(args[0])
            return ir.ite(ir.cmp("<", x, ir.const(0)), ir.neg(x), x)
        return None

    def call_minmax(self, name, args, node):
        if len(args) == 1 and isinstance(args[0], ir.Tup):
            args = list(args[0].items)  # min((a, b, c)) is min(a, b, c)
            if not args:
                self.raise_when(ir.TRUE, ValueError, node.lineno,
                                f"{name}() of an empty sequence")
                return ir.const(0)
            if len(args) == 1 and isinstance(args[0], ir.Term):
                return args[0]
        elif len(args) == 1 and isinstance(args[0], ir.Term) and args[0].sort != ir.STR:
            # max(5): an int is not iterable
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            f"{name}() of a single int: an int is not iterable")
            return ir.const(0)
        if len(args) < 2 or not all(isinstance(a, ir.Term) for a in args):
            return None
        # CPython keeps the first extreme item: replace only on strict improvement.
        op = "<" if name == "min" else ">"
        kinds = {ir.STR if a.sort == ir.STR else a.sort == ir.FLOAT for a in args}
        if ir.STR in kinds and len(kinds) > 1:
            return self.type_error(node, f"'{op}' not supported between a str and a number")
        if len(kinds) > 1:
            return self.refuse("mixed", node.lineno, {
                "construct": node.as_string(), "shapes": "int and float"})
        best = args[0]
        for a in args[1:]:
            best = ir.ite(ir.cmp(op, a, best), a, best)
        return best

    def call_int(self, name, args, node):
        if len(args) == 1 and isinstance(args[0], ir.Term):
            if args[0].sort == ir.STR:
                return None  # parsing digits is not modelled
            if args[0].sort == ir.FLOAT:
                return self.float_to_int("trunc", args[0], node)
            return ir.as_int(args[0])
        return None

    def float_to_int(self, how: str, x: ir.Term, node) -> ir.Term:
        """int(x), math.floor(x), math.ceil(x) for a float: an int, or an error."""
        self.raise_when(ir.op("isinf", x, sort=ir.BOOL), OverflowError, node.lineno,
                        "cannot convert float infinity to integer")
        self.raise_when(ir.op("isnan", x, sort=ir.BOOL), ValueError, node.lineno,
                        "cannot convert float NaN to integer")
        return ir.op(how, x, sort=ir.INT)

    def call_float(self, name, args, node):
        if not args:
            return ir.const(0.0)
        if len(args) != 1:
            return None
        if isinstance(args[0], ir.Term) and args[0].sort != ir.STR:
            return self.to_float(args[0], node.lineno)
        return None

    def float_of_text(self, text: str, node) -> ir.Term:
        """float("nan"), float("inf"), float("1e-3"): a constant, as Python parses it."""
        try:
            return ir.Const(float(text), ir.FLOAT)
        except ValueError:
            self.raise_when(ir.TRUE, ValueError, node.lineno,
                            f"could not convert string to float: {text!r}")
            return ir.const(0.0)

    def call_math(self, name, args, node):
        """The math functions modelled (``math`` module documentation)."""
        if not all(isinstance(a, ir.Term) for a in args):
            return None
        arity = 2 if name == "copysign" else 1
        if len(args) != arity:
            return None
        if any(a.sort == ir.STR for a in args):
            return self.type_error(node, "must be real number, not str")
        if name in ("floor", "ceil"):
            x = args[0]
            if x.sort != ir.FLOAT:
                return ir.as_int(x)  # math.floor(7) is 7: ints are not converted
            return self.float_to_int(name, x, node)
        xs = [self.to_float(a, node.lineno) for a in args]  # ints are converted first
        if name in ("isnan", "isinf", "isfinite"):
            return ir.op(name, xs[0], sort=ir.BOOL)
        if name == "sqrt":
            self.raise_when(ir.cmp("<", xs[0], ir.const(0.0)), ValueError, node.lineno,
                            "math domain error")
        if name == "copysign":
            # CPython reads the sign bit of a NaN (-float('nan') is negative);
            # the solver's NaN has no sign.
            self.unmodelled_when(ir.op("isnan", xs[1], sort=ir.BOOL), node.lineno,
                                 "math.copysign with a NaN second argument (the sign "
                                 "bit of a NaN is not modelled)")
        return ir.op(name, *xs, sort=ir.FLOAT)

    def call_len(self, name, args, node):
        if len(args) != 1:
            return None
        (v,) = args
        if isinstance(v, ir.Tup):
            return ir.const(len(v.items))
        if isinstance(v, ir.Term) and v.sort == ir.STR:
            return ir.op("len", v, sort=ir.INT) if not isinstance(v, ir.Const) \
                else ir.const(len(v.value))
        if isinstance(v, ir.Ref):
            if v.kind.startswith("list:"):
                return ir.op("len", self.contents(v), sort=ir.INT)
            return None  # an object's __len__ is a method call
        kind = "NoneType" if v is ir.NONE else ("int" if v.sort == ir.BOOL else v.sort)
        return self.type_error(node, f"object of type '{kind}' has no len()")

    def call_list(self, name, args, node):
        """``list(xs)``: a new list with the same items (a shallow copy)."""
        if len(args) == 1 and isinstance(args[0], ir.Ref) and args[0].kind.startswith("list:"):
            return self.new_list(args[0].kind, self.contents(args[0]))
        return None

    def call_str(self, name, args, node):
        if not args:
            return ir.const("")
        if len(args) != 1:
            return None
        (v,) = args
        if v is ir.NONE:
            return ir.const("None")
        if isinstance(v, ir.Opt):
            text = self.call_str(name, [v.value], node)
            return None if text is None else ir.ite(v.none, ir.const("None"), text)
        if not isinstance(v, ir.Term) or v.sort == ir.FLOAT:
            return None  # the repr of floats and tuples is not modelled
        if v.sort == ir.STR:
            return v
        if v.sort == ir.BOOL:
            return ir.ite(v, ir.const("True"), ir.const("False"))
        if isinstance(v, ir.Const):
            try:
                return ir.const(str(v.value))
            except ValueError as exc:  # past the digit limit, computed by CPython itself
                self.raise_when(ir.TRUE, ValueError, node.lineno, str(exc))
                return ir.const("")
        # Built-in Types, "Integer string conversion length limitation": past
        # sys.get_int_max_str_digits() digits (a setting of the interpreter,
        # 4300 by default in 3.11+) str(n) raises ValueError. Like running out
        # of memory, this is a limit of the running interpreter, not modelled:
        # with it in the formula the solver must reason about 4301-digit
        # numbers and stalls. The report states the assumption.
        limit = getattr(sys, "get_int_max_str_digits", lambda: 0)()
        # A length has at most 19 digits (it is below 2**63): no assumption needed.
        if limit and not (isinstance(v, ir.Op) and v.name == "len"):
            self.assume(f"str() of an int at line {node.lineno} is taken to succeed: "
                        f"CPython raises ValueError for ints of more than {limit} digits "
                        f"(sys.get_int_max_str_digits()), which is not modelled")
        text = ir.op("str_of_int", v, sort=ir.STR)
        boolean = ir.is_bool(v)  # a bool merged into an int prints as True/False
        if ir.is_false(boolean):
            return text
        return ir.ite(boolean, ir.ite(ir.cmp("!=", v, ir.const(0)), ir.const("True"),
                                      ir.const("False")), text)

    # ------------------------------------------------------------ str methods

    def str_method(self, name: str, s: ir.Term, args, node) -> ir.Value:
        """``s.name(*args)`` for the str methods modelled (str documentation,
        "String Methods"); None for the others."""
        def is_str(v):
            return isinstance(v, ir.Term) and v.sort == ir.STR

        def all_const(*vs):
            return all(isinstance(v, ir.Const) for v in vs)

        if name in ("startswith", "endswith"):
            if len(args) != 1:
                return None  # start and end arguments are not modelled
            if not isinstance(args[0], ir.Tup) and not is_str(args[0]):
                return self.type_error(node, f"{name} first arg must be str or a tuple "
                                             f"of str", ir.FALSE)
            options = args[0].items if isinstance(args[0], ir.Tup) else (args[0],)
            # The items are tried left to right; a non-str item raises
            # TypeError only if no earlier item matched.
            found: ir.Term = ir.FALSE
            for o in options:
                if not is_str(o):
                    self.raise_when(ir.not_(found), TypeError, node.lineno,
                                    f"tuple for {name} must only contain str")
                    return ir.TRUE if ir.is_false(self.live) else found
                hit = (ir.const(getattr(s.value, name)(o.value)) if all_const(s, o)
                       else ir.op(name, s, o, sort=ir.BOOL))
                found = ir.or_(found, hit)
            return found
        if name in ("find", "rfind", "index", "rindex"):
            if not 1 <= len(args) <= 3:
                return None
            sub, window = args[0], list(args[1:])
            while window and window[-1] is ir.NONE:
                window.pop()  # s.find(t, None) is s.find(t)
            if not is_str(sub):
                return self.type_error(node, "must be str, not " + (
                    "None" if sub is ir.NONE else "a non-str"))
            if any(w is ir.NONE for w in window):
                return None
            if not all(isinstance(w, ir.Term) and w.sort in (ir.INT, ir.BOOL) for w in window):
                return self.type_error(node, "slice indices must be integers or None")
            window = [ir.as_int(w) for w in window]
            base = "rfind" if name.startswith("r") else "find"
            if all_const(s, sub, *window):
                found = ir.const(getattr(s.value, base)(sub.value, *[w.value for w in window]))
            else:
                found = ir.op(base, s, sub, *window, sort=ir.INT)
            if name in ("index", "rindex"):
                self.raise_when(ir.cmp("==", found, ir.const(-1)), ValueError, node.lineno,
                                "substring not found")
            return found
        if name == "replace":
            if len(args) != 2:
                return None  # the count argument is not modelled
            old, new = args
            if not (is_str(old) and is_str(new)):
                return self.type_error(node, "replace() arguments must be str", s)
            if all_const(s, old, new):
                return ir.const(s.value.replace(old.value, new.value))
            if isinstance(old, ir.Const) and old.value == "":
                return None  # inserting around every character is not modelled
            if not isinstance(old, ir.Const):
                self.unmodelled_when(ir.cmp("==", old, ir.const("")), node.lineno,
                                     "str.replace with an empty old string")
            return ir.op("replace", s, old, new, sort=ir.STR)
        return None

    def call_bool(self, name, args, node):
        if len(args) == 1:
            return self.truth(args[0])
        if not args:
            return ir.FALSE
        return None


# Callees modelled, by the identity of the object the name resolves to.
_CALLS = {id(fn): (method, name) for fn, method, name in (
    (abs, "call_abs", "abs"), (min, "call_minmax", "min"), (max, "call_minmax", "max"),
    (int, "call_int", "int"), (bool, "call_bool", "bool"), (float, "call_float", "float"),
    (math.isnan, "call_math", "isnan"), (math.isinf, "call_math", "isinf"),
    (math.isfinite, "call_math", "isfinite"), (math.fabs, "call_math", "fabs"),
    (math.sqrt, "call_math", "sqrt"), (math.floor, "call_math", "floor"),
    (math.ceil, "call_math", "ceil"), (math.copysign, "call_math", "copysign"),
    (len, "call_len", "len"), (str, "call_str", "str"), (list, "call_list", "list"))}

# The str methods modelled, for the hint when another one is called.
STR_METHODS = ("startswith", "endswith", "find", "rfind", "index", "rindex", "replace")
