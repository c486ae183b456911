"""Crux & Chalk, a (fictional) bouldering and rope-climbing gym: the rules its
front desk software must get right, each with a spec next to the code."""
