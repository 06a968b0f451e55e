"""The built-in demo: three INVENTED instances of a made-up bicycle-parts wholesaler.

None of these numbers come from a real business; they are chosen to show the three kinds of
model (lost sales, backorders, backorders with a fixed order cost) at sizes that solve in seconds.
"""
from __future__ import annotations

from typing import Any

DEMO_INSTANCES: list[dict[str, Any]] = [
    {   # invented: walk-in trade counter, a customer without stock goes elsewhere
        "name": "chain-links (invented)", "model": "lost_sales", "lead_time": 2,
        "holding_cost": 1.0, "shortage_cost": 14.0,
        "demand": {"distribution": "poisson", "mean": 4.0},
    },
    {   # invented: workshops order brake pads and wait when out of stock
        "name": "brake-pads (invented)", "model": "backorder", "lead_time": 1,
        "holding_cost": 1.0, "shortage_cost": 9.0, "case_pack": 2,
        "demand": {"distribution": "negative_binomial", "mean": 6.0, "variance": 12.0},
    },
    {   # invented: rims come by truck, each delivery costs a fixed fee
        "name": "wheel-rims (invented)", "model": "backorder", "lead_time": 1,
        "holding_cost": 1.0, "shortage_cost": 19.0, "fixed_order_cost": 40.0, "max_order": 60,
        "demand": {"distribution": "poisson", "mean": 3.0},
    },
]
