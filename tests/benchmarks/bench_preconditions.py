"""What the preconditions of a refutation cost (run on demand; asserts nothing).

For every obligation of the suggestion corpus (tests/suggestion_corpus.py, 20
refuted specs of every kind), ``refines.check.check_function`` is timed
twice, interleaved, in each repeat: as shipped, and with the search for
simpler sufficient preconditions switched off (``sufficient.alternatives``
returning nothing). Within the shipped run, the time spent in
``precondition.compute`` and in ``sufficient.alternatives`` is recorded.
Medians over the repeats are printed per obligation, with the ratio of the
two full checks measured side by side, and the totals.

    .venv/bin/python tests/benchmarks/bench_preconditions.py [--repeats 5]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path
from typing import Callable, Dict, List

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))  # tests/: helpers and the corpus

from refines import precondition, sufficient  # noqa: E402
from refines.check import check_attached, check_function  # noqa: E402
from refines.items import obligations  # noqa: E402

from helpers import load_module  # noqa: E402


def _timed(owner, name: str, into: List[float]) -> Callable[[], None]:
    """Wrap ``owner.name`` to add each call's seconds to ``into``; returns the undo."""
    original = getattr(owner, name)

    def wrapper(*args, **kwargs):
        start = time.perf_counter()
        try:
            return original(*args, **kwargs)
        finally:
            into.append(time.perf_counter() - start)

    setattr(owner, name, wrapper)
    return lambda: setattr(owner, name, original)


def run(repeats: int = 5, timeout: float = 10.0) -> Dict[str, Dict[str, float]]:
    corpus = (HERE.parent / "suggestion_corpus.py").read_text(encoding="utf-8")
    module, path = load_module(Path(tempfile.mkdtemp()), corpus, header="")
    show = lambda p: Path(p).name  # noqa: E731
    items = list(obligations(module))
    samples: Dict[str, Dict[str, List[float]]] = {}

    def check(name, fn, index, att):
        if att is not None:
            return check_attached(att, vars(module), timeout, show=show)
        return check_function(fn, index, str(path), module.__name__, timeout, show=show)

    for _ in range(repeats):
        for name, fn, index, att in items:
            s = samples.setdefault(name, {"full": [], "compute": [], "alternatives": [],
                                          "without": []})
            compute: List[float] = []
            alternatives: List[float] = []
            undo = [_timed(precondition, "compute", compute),
                    _timed(precondition.sufficient, "alternatives", alternatives)]
            start = time.perf_counter()
            check(name, fn, index, att)
            s["full"].append(time.perf_counter() - start)
            for u in undo:
                u()
            s["compute"].append(sum(compute))
            s["alternatives"].append(sum(alternatives))
            saved = sufficient.alternatives
            sufficient.alternatives = lambda *a, **k: ([], None)
            try:
                start = time.perf_counter()
                check(name, fn, index, att)
                s["without"].append(time.perf_counter() - start)
            finally:
                sufficient.alternatives = saved
    return {name: {k: statistics.median(v) for k, v in s.items()} for name, s in samples.items()}


def report(medians: Dict[str, Dict[str, float]], out=print) -> None:
    out(f"{'obligation':28} {'check':>9} {'precond.':>9} {'of which':>9} "
        f"{'no suff.':>9} {'ratio':>6}")
    out(f"{'':28} {'ms':>9} {'ms':>9} {'suff. ms':>9} {'ms':>9} {'':>6}")
    for name, m in medians.items():
        out(f"{name:28} {m['full'] * 1000:9.1f} {m['compute'] * 1000:9.1f} "
            f"{m['alternatives'] * 1000:9.1f} {m['without'] * 1000:9.1f} "
            f"{m['full'] / m['without']:6.2f}")
    total = {k: sum(m[k] for m in medians.values()) for k in ("full", "compute",
                                                            "alternatives", "without")}
    out(f"{'total':28} {total['full'] * 1000:9.1f} {total['compute'] * 1000:9.1f} "
        f"{total['alternatives'] * 1000:9.1f} {total['without'] * 1000:9.1f} "
        f"{total['full'] / total['without']:6.2f}")
    out("check: the whole check_function (translation, solving, replay, preconditions,"
        " regression test); precond.: precondition.compute within it; of which suff.:"
        " sufficient.alternatives; no suff.: the whole check with that search off;"
        " ratio: check / no suff., measured side by side")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--timeout", type=float, default=10.0)
    args = parser.parse_args(argv)
    report(run(args.repeats, args.timeout))
    return 0


if __name__ == "__main__":
    sys.exit(main())
