"""The HTTP JSON service: `GET /health`, `GET /policies`, `POST /v1/order`, over saved policies.

A request names a loaded policy and gives one state (or a list of such requests); the answer is
the order in units. A bad request gets status 422 with one line naming the field (e.g.
`state[1]: must be a whole number of units in [0, 1000000000] (...), got 2.5`); a state the
policy does not cover (off a saved table) is a bad request too, never a silent 0.
"""
from __future__ import annotations

import json
from typing import Any, Mapping

import numpy as np
from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse

from invbench.envs.errors import SpecError

from .decisions import LoadedPolicy, PolicyError, check_state, decide_rows, order_payload

#: Requests in one batch (a list body); larger batches are refused with 422.
MAX_BATCH = 10_000
#: Largest request body in bytes, refused with 413 before it is parsed.
MAX_BODY = 8 << 20


def _error(status: int, msg: str) -> JSONResponse:
    return JSONResponse({"detail": msg}, status_code=status)


def create_app(policies: Mapping[str, LoadedPolicy]) -> FastAPI:
    """The FastAPI app serving `policies` (name -> LoadedPolicy), loaded and checked beforehand."""
    app = FastAPI(title="invbench policy service", version="1",
                  description="Orders in units from saved invbench policies, for given states.")
    names = ", ".join(policies)
    listing = [lp.describe() for lp in policies.values()]

    @app.get("/health")
    async def health() -> dict[str, Any]:
        return {"status": "ok", "policies": len(policies)}

    @app.get("/policies")
    async def list_policies() -> list[dict[str, Any]]:
        return listing

    def _one(item: Any, field: str) -> tuple[LoadedPolicy, list[int]]:
        if not isinstance(item, dict):
            raise SpecError(f"{field or 'body'}: must be an object with policy and state")
        unknown = set(item) - {"policy", "state"}
        if unknown:
            raise SpecError(f"{field}{'.' if field else ''}{sorted(unknown)[0]}: unknown key (allowed: policy, state)")
        name = item.get("policy")
        lp = policies.get(name) if isinstance(name, str) else None
        if lp is None:
            raise SpecError(f"{field}{'.' if field else ''}policy: must be one of {names}, got {name!r}")
        return lp, check_state(item.get("state"), lp, f"{field}{'.' if field else ''}state")

    @app.post("/v1/order")
    async def order(request: Request) -> JSONResponse:
        body = await request.body()
        if len(body) > MAX_BODY:
            return _error(413, f"body: at most {MAX_BODY} bytes")
        try:
            data = json.loads(body)
        except (UnicodeDecodeError, json.JSONDecodeError) as e:
            return _error(422, f"body: not valid JSON ({e.__class__.__name__})")
        try:
            if isinstance(data, list):
                if not 1 <= len(data) <= MAX_BATCH:
                    raise SpecError(f"body: a list of 1 to {MAX_BATCH} requests, got {len(data)}")
                return JSONResponse(_batch(data))
            lp, state = _one(data, "")
            orders = decide_rows(lp, np.array([state], dtype=np.int64), lambda r: "state")
            return JSONResponse(order_payload(orders[0], lp.slots))
        except SpecError as e:
            return _error(422, str(e))
        except PolicyError as e:
            return _error(500, str(e))

    def _batch(items: list[Any]) -> list[dict[str, Any]]:
        checked = [_one(item, f"[{i}]") for i, item in enumerate(items)]
        out: list[dict[str, Any] | None] = [None] * len(items)
        groups: dict[str, list[int]] = {}
        for i, (lp, _) in enumerate(checked):
            groups.setdefault(lp.name, []).append(i)
        for name, rows in groups.items():  # one policy call per policy in the batch
            lp = policies[name]
            states = np.array([checked[i][1] for i in rows], dtype=np.int64)
            orders = decide_rows(lp, states, lambda r, rows=rows: f"[{rows[r]}].state")
            for j, i in enumerate(rows):
                out[i] = order_payload(orders[j], lp.slots)
        return out  # type: ignore[return-value]

    return app
