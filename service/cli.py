"""`invbench decide DIR --state 4,6` (or a CSV batch) and `invbench serve DIR ...` (HTTP JSON).

Both load saved policies (any kind) with every file checked, and check every state against the
model before a policy sees it; bad input ends in one line naming the field and exit code 2.
"""
from __future__ import annotations

import argparse
import ipaddress
import json
import socket
import sys
from pathlib import Path
from typing import Any

import numpy as np

from invbench.cli_args import check_output_dir, integer
from invbench.envs.errors import SpecError

from .decisions import LoadedPolicy, check_state_array, decide_rows, load_policies, order_payload, parse_state_text

STATE_COL = "state_{}"


def _order_columns(lp: LoadedPolicy) -> list[str]:
    return ["order"] if len(lp.slots) == 1 else [f"order_{s}" for s in lp.slots]


def _check_output(path: str, inputs: str | None) -> Path:
    p = Path(path)
    if p.suffix.lower() != ".csv":
        raise SpecError(f"--output: the file must end in .csv, got {p.name!r}")
    if p.is_dir():
        raise SpecError(f"--output: {p} is a directory, not a file")
    if inputs is not None and p.resolve() == Path(inputs).resolve():
        raise SpecError("--output: must not be the --input file")
    check_output_dir(p.parent, "--output")
    return p


def _read_states(path: str, lp: LoadedPolicy) -> tuple[Any, np.ndarray]:
    """The CSV's rows and its state columns (state_0 .. state_{n-1}, or the model's labels)."""
    import pandas as pd
    p = Path(path)
    if not p.is_file():
        raise SpecError(f"--input: {str(p)!r} does not exist or is not a file")
    try:
        df = pd.read_csv(p, dtype=str, keep_default_na=False, encoding="utf-8")
    except UnicodeDecodeError:
        raise SpecError(f"--input: {p} is not UTF-8 text; save it as UTF-8") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as e:
        raise SpecError(f"--input: {p} is not a readable CSV ({str(e).splitlines()[0]})") from None
    n = lp.spec.state_dim
    labels = lp.spec.model_def.state_labels(lp.spec)
    cols = [STATE_COL.format(i) for i in range(n)]
    if not all(c in df.columns for c in cols):
        if all(lab in df.columns for lab in labels):
            cols = labels
        else:
            raise SpecError(f"--input: {p} needs the columns {', '.join(cols)} ({'; '.join(labels)})")
    if len(df) == 0:
        raise SpecError(f"--input: {p} has no rows")
    clash = [c for c in _order_columns(lp) if c in df.columns]
    if clash:
        raise SpecError(f"--input: {p} already has a column {clash[0]!r} (the output's order column)")
    x = df[cols].apply(pd.to_numeric, errors="coerce").to_numpy(dtype=np.float64)
    states = check_state_array(x, lp, lambda r, c: f"--input {p.name} row {r + 2}, column {cols[c]}",
                               df[cols].to_numpy())
    return df, states


def _decide(args: argparse.Namespace) -> int:
    if bool(args.state) == bool(args.input):
        raise SpecError("--state / --input: give one or more --state values, or --input with --output")
    if args.input and not args.output:
        raise SpecError("--output: required with --input (a .csv file for the orders)")
    if args.output and not args.input:
        raise SpecError("--output: only with --input")
    out_path = _check_output(args.output, args.input) if args.output else None
    lp = next(iter(load_policies([f"policy={args.dir}"], "DIR").values()))
    if args.input:
        df, states = _read_states(args.input, lp)
        orders = decide_rows(lp, states, lambda r: f"--input row {r + 2}")
        for j, col in enumerate(_order_columns(lp)):
            df[col] = orders[:, j]
        from invbench.baselines.artifact_io import atomic_write
        atomic_write(out_path, df.to_csv(index=False).encode())  # type: ignore[arg-type]
        print(f"{len(df):,} orders written to {out_path} (policy {lp.policy.describe()})")
        return 0
    states = np.array([parse_state_text(t, lp, "--state") for t in args.state], dtype=np.int64)
    orders = decide_rows(lp, states, lambda r: f"--state {args.state[r]}")
    if args.json:
        rows = [{"state": s.tolist(), **order_payload(o, lp.slots)} for s, o in zip(states, orders)]
        print(json.dumps(rows[0] if len(rows) == 1 else rows, indent=2))
        return 0
    for s, o in zip(states, orders):
        total = int(o.sum())
        line = f"state {','.join(map(str, s))}: order {total} units"
        if len(lp.slots) > 1:
            line += " (" + ", ".join(f"{name} {int(v)}" for name, v in zip(lp.slots, o)) + ")"
        print(line)
    return 0


def _check_bind(host: str, port: int) -> None:
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except socket.gaierror as e:
        raise SpecError(f"--host: {host!r} is not an address of this machine ({e.strerror})") from None
    family, _, _, _, addr = infos[0]
    with socket.socket(family, socket.SOCK_STREAM) as s:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            s.bind(addr)
        except OSError as e:
            raise SpecError(f"--port: cannot listen on {host}:{port} ({e.strerror or e})") from None


def _is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    from .app import create_app
    policies = load_policies(args.dirs)  # every file checked before the port is opened
    _check_bind(args.host, args.port)
    app = create_app(policies)
    if not _is_loopback(args.host):
        sys.stderr.write(f"note: listening on {args.host}, reachable from other machines; the service has no "
                         "authentication\n")
    shown = f"[{args.host}]" if ":" in args.host else args.host
    print(f"serving {len(policies)} polic{'y' if len(policies) == 1 else 'ies'} ({', '.join(policies)}) on "
          f"http://{shown}:{args.port} (GET /health, GET /policies, POST /v1/order); Ctrl-C stops", flush=True)
    config = uvicorn.Config(app, host=args.host, port=args.port, log_level=args.log_level,
                            access_log=args.access_log, lifespan="off", server_header=False)
    uvicorn.Server(config).run()
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("decide", help="the order a saved policy places for given states",
                       description="Print the order (units; per supplier or stage where the model has several) "
                                   "for one or more states, or write orders for a CSV of states.")
    p.add_argument("dir", metavar="DIR", help="a saved policy folder (solve --save, evaluate --save, train)")
    p.add_argument("--state", action="append", metavar="X0,X1,...",
                   help="a state, comma-separated, in the model's order (repeatable)")
    p.add_argument("--input", metavar="STATES.csv",
                   help="CSV with columns state_0 .. state_{n-1} (or the model's state labels); other columns "
                        "are copied to the output")
    p.add_argument("--output", metavar="ORDERS.csv", help="where --input's rows are written with their orders")
    p.add_argument("--json", action="store_true", help="print the answer as JSON")
    p.set_defaults(func=_decide)

    p = sub.add_parser("serve", help="HTTP JSON service answering orders from saved policies",
                       description="Serve saved policies over HTTP: GET /health, GET /policies, POST /v1/order "
                                   'with {"policy": NAME, "state": [...]} or a list of such. Binds to 127.0.0.1 '
                                   "unless --host says otherwise.")
    p.add_argument("dirs", nargs="+", metavar="DIR", help="saved policy folders, as DIR or NAME=DIR "
                                                          "(the name defaults to the folder's name)")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1, this machine only)")
    p.add_argument("--port", type=integer(1, 65535), default=8000, help="TCP port, in [1, 65535] (default 8000)")
    p.add_argument("--log-level", choices=("critical", "error", "warning", "info", "debug"), default="warning")
    p.add_argument("--access-log", action="store_true", help="log every request (slower)")
    p.set_defaults(func=_serve)
