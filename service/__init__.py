"""Decisions from saved policies: `invbench decide` on the command line and `invbench serve`, an
HTTP JSON service (FastAPI on uvicorn) answering orders for states.
"""
