"""Ordinary example-based tests live beside the specs, as in any project."""

from climbing_gym.passes import day_pass_price, split_bill


def test_member_adult_pays_less():
    assert day_pass_price(30, member=True) < day_pass_price(30, member=False)


def test_split_bill_example():
    assert split_bill(1000, 3) == (333, 1)
