"""A corpus of refuted specs, for the suggestion workflow's tests.

An invented scenario: the rules of a community orchard (plots, watering,
compost, seed packets). Every spec here is refuted, and every one but
``never_met`` gets a suggested ``assuming=``. The tests (test_suggestions.py)
check that each printed precondition means what it says, by running the
functions on many inputs, and that applying every suggestion makes its spec
prove. The file is read as text and imported as a fresh module by the tests;
pytest does not collect it (its name does not start with ``test_``). It does
not import ``math``: applying the NaN suggestion must add the import.
"""

import calendar
from dataclasses import dataclass
from typing import List, Optional

from refines import attach, old, refines

PLOTS = 10
GARDENERS_PER_PLOT = 4
WATER_CAP = 60
COMPOST_MIN = 5
LABEL_WIDTH = 3


# -- ints ----------------------------------------------------------------


@refines(lambda gardeners, result: 0 <= result <= PLOTS,
         assuming=lambda gardeners: gardeners >= 0)
def plots_needed(gardeners: int) -> int:
    """Plots to open: four gardeners share one."""
    return (gardeners + GARDENERS_PER_PLOT - 1) // GARDENERS_PER_PLOT


@refines(lambda liters, plots, result: result * plots <= liters)
def water_per_plot(liters: int, plots: int) -> int:
    """The water each plot gets (a division by zero when there are no plots)."""
    return liters // plots


@refines(lambda kg, organic, result: result <= WATER_CAP)
def harvest_points(kg: int, organic: bool) -> int:
    """Points on the board: organic harvests count double, others by the week."""
    return kg * 2 if organic else kg % 7


@refines(lambda kg, result: result >= COMPOST_MIN,
         raises={ValueError: lambda kg: kg < -5})
def compost_fee(kg: int) -> int:
    """A fee per bag of compost; a negative weight is refused."""
    if kg < 0:
        raise ValueError("negative weight")
    return COMPOST_MIN + kg // 3


@refines(lambda seeds, beds, result: 0 <= result[1] < beds)
def seeds_per_bed(seeds: int, beds: int) -> tuple:
    """Seeds for each bed, and the ones left over."""
    return seeds // beds, seeds % beds


# -- floats ---------------------------------------------------------------


@refines(lambda reading, result: 0.0 <= result <= 1.0)
def moisture_gauge(reading: float) -> float:
    """A soil sensor's reading, held to [0, 1] for the gauge (a NaN passes through)."""
    if reading < 0.0:
        return 0.0
    if reading > 1.0:
        return 1.0
    return reading


@refines(lambda ph, result: -6.0 <= result <= 6.0)
def lime_units(ph: float) -> float:
    """Units of lime (negative: of sulphur) to bring the soil to neutral."""
    return (7.0 - ph) * 2.0


# -- strs ------------------------------------------------------------------


@refines(lambda name, result: len(result) == LABEL_WIDTH)
def plot_label(name: str) -> str:
    """The first letter of the gardener's name and a two-letter suffix."""
    return name[0] + "-P"


@refines(lambda code, result: len(result) <= 8)
def row_code(code: str) -> str:
    """A row's code on the map: a prefix, the code and its first letter again."""
    return "RW-" + code + code[0] if code else "NONE"


# -- lists and objects -------------------------------------------------------


@refines(lambda crops, result: result >= 0)
def first_yield(crops: List[int]) -> int:
    """The first crop's yield in the season's list."""
    return crops[0]


@refines(lambda spare, shed, result: shed == old(shed) + old(spare) and spare == old(spare))
def store_tools(spare: List[int], shed: List[int]) -> None:
    """Put the spare tools' tags into the shed's list (the same list twice breaks it)."""
    shed.extend(spare)


@dataclass
class Bed:
    depth: int


@refines(lambda bed, cm, result: bed.depth >= 0)
def dig(bed: Bed, cm: int) -> None:
    """Dig a bed deeper by ``cm`` (a negative ``cm`` fills it in)."""
    bed.depth += cm


@refines(lambda code, result: result <= 30)
def member_discount(code: Optional[int]) -> int:
    """A discount in percent: the code's value, or none without a code."""
    if code is None:
        return 0
    return code


# -- untranslated parts ---------------------------------------------------------


@refines(lambda tag, extra, result: result <= 10)
def shelf_slot(tag: int, extra: int) -> int:
    """A shelf slot from the low bits of a tool tag (a bitwise and of two ints)."""
    if extra > 3:
        return (tag & extra) + extra
    return extra


def rate_for(kind: int) -> int:
    """Not translated: a call to it is abstracted (its result is any int)."""
    return -1 if kind == 0 else 3


@refines(lambda minutes, kind, result: result >= 0)
def hose_fee(minutes: int, kind: int) -> int:
    """The first quarter hour of hose time is free."""
    if minutes <= 15:
        return 0
    return rate_for(kind) * 2


@refines(lambda n, result: result == n, assuming=lambda n: n >= 0)
def counted_packets(n: int) -> int:
    """Count seed packets one by one (a loop), with a fast path for big orders.

    Planted bug: seven packets are counted as none. The loop is not
    translated, so testing finds it; the precondition whatever the loop does
    covers the fast path only."""
    if n > 100:
        return n
    total = 0
    for _ in range(n):
        total += 1
    return total if n != 7 else 0


# -- stacked specs and attached ones ---------------------------------------------


@refines(lambda rows, result: result >= 0)
@refines(lambda rows, result: result <= 20, assuming=lambda rows: rows >= 0)
def paths_between(rows: int) -> int:
    """Paths between rows of trees: one fewer than the rows."""
    return rows - 1


# calendar.isleap is pure Python: a spec that forgets the century rule is
# refuted, and the precondition says where the two agree.
attach(calendar.isleap, lambda year, result: result == (year % 4 == 0),
       hints={"year": int})


# -- nothing meets it -------------------------------------------------------------


@refines(lambda x, result: result != result)
def never_met(x: int) -> int:
    """No input meets this spec: no suggestion, and the file keeps it as it is."""
    return x

