"""The model's one step function bound to an instance, and its start state.

The rules themselves live in each model's folder (`envs/models/<name>/model.py`); these two
helpers are what the solver, evaluator and simulator call so that they never ask which model
they hold.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from .models.base import Outcome
from .spec import InstanceSpec

StepFn = Callable[[np.ndarray, np.ndarray, np.ndarray], tuple[np.ndarray, Outcome]]


def step_fn(spec: InstanceSpec) -> StepFn:
    """`step(state[B, n], orders[B] or [B, k], demand[B], **inputs) -> (next_state, outcome)`
    for `spec`; `inputs` are the model's other random inputs, if any (`random_inputs.py`)."""
    model = spec.model_def

    def step(state: np.ndarray, order: np.ndarray, demand: np.ndarray,
             **inputs: np.ndarray) -> tuple[np.ndarray, Outcome]:
        return model.step(spec, state, order, demand, **inputs)

    return step


def initial_state(spec: InstanceSpec, batch: int = 1) -> np.ndarray:
    """The model's default start (no stock, nothing in transit)."""
    return spec.model_def.start_state(spec, batch)
