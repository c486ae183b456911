"""Session bookings: member codes (str), booking records (objects) and wait lists (lists)."""

from dataclasses import dataclass

from refines import old, refines


@dataclass
class Booking:
    climber: str
    slots: int


@refines(lambda b, n, result: b.slots == old(b.slots) + n and b.climber == old(b.climber),
         raises={ValueError: lambda b, n: n <= 0})
def add_slots(b: Booking, n: int) -> None:
    """Book n more slots on an existing booking."""
    if n <= 0:
        raise ValueError("book at least one slot")
    b.slots += n


@refines(lambda name, result: len(result) >= 2 and result[0] == name[0])
def member_code(name: str) -> str:
    """A short code for the wall board: first letter and the name's length.

    Planted bug for the demo: a walk-in with no name on file ('') has no first
    letter, and name[0] raises IndexError.
    """
    return name[0] + str(len(name))


@refines(lambda waiting, moved, result: moved == old(moved)
         and waiting == old(waiting) + old(moved))
def merge_wait_lists(waiting: list[str], moved: list[str]) -> None:
    """Append the climbers moved from another session to this session's list.

    Planted bug for the demo: called with the same list twice, extend() also
    changes `moved` -- an aliasing case that a repr cannot show.
    """
    waiting.extend(moved)
