"""Memberships: loyalty stamps, wall-board tags, renewal dates and the desk's queue.

This file shows what happens to code the prover cannot follow all the way:
a loop, a method it does not model, a function from the standard library.
"""

import calendar

from refines import attach, refines

STAMPS_PER_FREE_VISIT = 10


@refines(lambda cards, result: 0 <= result <= len(cards))
def free_visits(cards: list[int]) -> int:
    """How many stamp cards are full: each full card earns one free visit.

    The loop is not translated, so this cannot be proved; it is tested, and
    the report says so ("TESTED (not proved)").
    """
    free = 0
    for stamps in cards:
        if stamps >= STAMPS_PER_FREE_VISIT:
            free += 1
    return free


@refines(lambda name, result: result.startswith("CRUX-") and len(result) >= 5)
def wall_tag(name: str) -> str:
    """The tag on a member's chalk bag: the gym's prefix and the name in capitals.

    str.upper is not modelled, but the spec holds whatever it returns: proved,
    and the report names the part it did not translate.
    """
    return "CRUX-" + name.strip().upper()


@refines(lambda waiting, result: result == waiting - waiting // 4,
         assuming=lambda waiting: waiting >= 0)
def seated_after_rounds(waiting: int) -> int:
    """Climbers seated after the desk works through the queue in rounds of four,
    one round at a time, seating three of every four in each full round.

    Planted bug for the demo: the loop stops one round early when the queue
    is an exact multiple of four. The loop is not translated, so the solver
    cannot settle it; the tester tries the loop's own constant (4) and finds it,
    and the report gives a regression test to paste.
    """
    seated = 0
    left = waiting
    while left > 4:
        seated += 3
        left -= 4
    return seated + left


# The renewal date relies on the standard library's calendar; the rule it
# must follow (the Gregorian calendar) is checked here, not taken on trust.
# calendar.monthrange goes through datetime, which is not translated: tested.
attach(calendar.monthrange,
       lambda year, month, result: result[1] == (
           29 if month == 2 and calendar.isleap(year)
           else 28 if month == 2
           else 30 if month in (4, 6, 9, 11)
           else 31),
       assuming=lambda year, month: 1 <= year <= 9999 and 1 <= month <= 12,
       hints={"year": int, "month": int})

# calendar.isleap is pure Python: with a type for `year`, it is proved.
attach(calendar.isleap,
       lambda year, result: result == (year % 4 == 0 and (year % 100 != 0 or year % 400 == 0)),
       hints={"year": int})
