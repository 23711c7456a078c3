"""Build the invented demo model: a picker robot in a small parts warehouse (JSON action model)."""

from __future__ import annotations

from typing import Any

__all__ = ["EXAMPLE", "warehouse_example"]

# Aisle distances in metres between the robot's stops.
_PLACES = ("charger", "shelf-a", "shelf-b", "packing")
_DIST = {("charger", "shelf-a"): 4.0, ("charger", "shelf-b"): 6.0, ("charger", "packing"): 5.0,
         ("shelf-a", "shelf-b"): 3.0, ("shelf-a", "packing"): 4.5, ("shelf-b", "packing"): 2.5}
_PARTS = {"bolts": "shelf-a", "gears": "shelf-b"}


def warehouse_example() -> dict[str, Any]:
    """Return the demo problem: fetch bolts and gears to the packing station and pack them."""
    facts = [f"robot at {p}" for p in _PLACES] + ["hand empty"]
    for part, shelf in _PARTS.items():
        facts += [f"{part} on {shelf}", f"holding {part}", f"{part} packed"]
    actions: list[dict[str, Any]] = []
    for (a, b), d in _DIST.items():
        for src, dst in ((a, b), (b, a)):
            actions.append({"name": f"drive {src} to {dst}", "pre": [f"robot at {src}"],
                            "add": [f"robot at {dst}"], "delete": [f"robot at {src}"], "cost": d})
    for part, shelf in _PARTS.items():
        actions.append({"name": f"pick {part}", "pre": [f"robot at {shelf}", f"{part} on {shelf}", "hand empty"],
                        "add": [f"holding {part}"], "delete": [f"{part} on {shelf}", "hand empty"], "cost": 1.0})
        actions.append({"name": f"pack {part}", "pre": ["robot at packing", f"holding {part}"],
                        "pre_not": [f"{part} packed"],
                        "add": [f"{part} packed", "hand empty"], "delete": [f"holding {part}"], "cost": 1.5})
    return {
        "domain": "strips",
        "facts": facts,
        "init": ["robot at charger", "hand empty", "bolts on shelf-a", "gears on shelf-b"],
        "goal": ["bolts packed", "gears packed", "robot at charger"],
        "actions": actions,
    }


EXAMPLE = warehouse_example()
