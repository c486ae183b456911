"""Test-suite set-up.

pytester's in-process runs drop the modules first imported during an inner
run, and the next inner run would import fresh copies beside the stale ones
still bound in the ``refines`` package. A real pytest run imports them once;
preloading them here gives every inner run that same single copy.
"""

import refines.items  # noqa: F401
import refines.precondition  # noqa: F401
import refines.prove  # noqa: F401
import refines.report  # noqa: F401
import refines.check  # noqa: F401
import refines.fallback  # noqa: F401  (with hypothesis, which it draws with)
import refines.apply  # noqa: F401
import refines.explain  # noqa: F401
import refines.rewrite  # noqa: F401
