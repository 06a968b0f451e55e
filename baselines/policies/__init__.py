"""Classical inventory policies (base-stock, (s, S), constant order, capped base-stock, PIL,
myopic; echelon and installation base-stock and the Shang-Song levels for the serial chain),
each with its parameters, `act`, `from_params` and an `optimize` that finds its best parameters;
`registry` maps the plain names used on the command line to the classes.
"""
from .base_stock import BaseStockPolicy
from .capped_base_stock import CappedBaseStockPolicy
from .constant_order import ConstantOrderPolicy
from .echelon import EchelonBaseStockPolicy, InstallationBaseStockPolicy, ShangSongPolicy
from .myopic import MyopicPolicy
from .pil import PILPolicy
from .registry import POLICIES, make_policy, policy_class, policy_descriptions, policy_names
from .s_s import SSPolicy

__all__ = [
    "BaseStockPolicy", "CappedBaseStockPolicy", "ConstantOrderPolicy", "MyopicPolicy", "PILPolicy",
    "SSPolicy", "EchelonBaseStockPolicy", "InstallationBaseStockPolicy", "ShangSongPolicy", "POLICIES", "make_policy", "policy_class", "policy_descriptions", "policy_names",
]
