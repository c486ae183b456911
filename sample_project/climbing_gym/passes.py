"""Day passes, punch cards and shared bills. All prices are in cents."""

from refines import refines

ADULT_PASS = 1800
CHILD_PASS = 1100
MEMBER_DISCOUNT = 300
CHILD_AGE_LIMIT = 14  # climbers younger than this pay the child price


@refines(lambda age, member, result: 0 < result <= ADULT_PASS,
         raises={ValueError: lambda age, member: age < 0})
def day_pass_price(age: int, member: bool) -> int:
    """What a single visit costs at the front desk."""
    if age < 0:
        raise ValueError("age cannot be negative")
    price = CHILD_PASS if age < CHILD_AGE_LIMIT else ADULT_PASS
    if member:
        price -= MEMBER_DISCOUNT
    return price


@refines(lambda visits, result: 0 < result <= visits * ADULT_PASS,
         raises={ValueError: lambda visits: visits <= 0})
def punch_card_price(visits: int) -> int:
    """A card for several visits: every tenth visit is free."""
    if visits <= 0:
        raise ValueError("a punch card holds at least one visit")
    free = visits // 10
    return (visits - free) * ADULT_PASS


@refines(lambda total, people, result:
         result[0] * people + result[1] == total and 0 <= result[1] < people,
         raises={ValueError: lambda total, people: people <= 0})
def split_bill(total: int, people: int) -> tuple:
    """Split a group's bill evenly; the desk collects the leftover cents once."""
    if people <= 0:
        raise ValueError("a bill is split between at least one person")
    return total // people, total % people


@refines(lambda age, result: result == (CHILD_PASS if age < CHILD_AGE_LIMIT else ADULT_PASS),
         assuming=lambda age: age >= 0)
def birthday_party_price(age: int) -> int:
    """Party guests pay a day pass at the price for their age.

    Planted bug for the demo: the boundary uses <= where the house rule says
    "younger than CHILD_AGE_LIMIT".
    """
    if age <= CHILD_AGE_LIMIT:
        return CHILD_PASS
    return ADULT_PASS
