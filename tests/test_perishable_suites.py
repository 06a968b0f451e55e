"""The perishable suites load and hold the grids they describe (Temizöz et al.'s perishable
setting; De Moor, Gijsbrechts & Boute's short shelf life), with policies defined for the model."""
from invbench.baselines.policies.registry import supports
from invbench.experiments.suite import load_suite


def test_perishable_suite_is_the_published_grid():
    s = load_suite("perishable")
    grid = {(i.shelf_life, i.lead_time, i.issuing) for i in s.instances}
    # Temizöz et al. (perishable experiments, as stated in our brief): m = 3..5, L = 0..2, FIFO/LIFO.
    assert grid == {(m, L, k) for m in (3, 4, 5) for L in (0, 1, 2) for k in ("fifo", "lifo")}
    for i in s.instances:
        assert i.model == "perishable" and i.demand.params["mean"] == 4.0
        assert (i.shortage_cost, i.outdating_cost, i.holding_cost, i.unit_order_cost) == (100.0, 100.0, 0.0, 0.0)
        assert i.order_cap_units == 14
    names = {p.name for p in s.policies if p.kind == "classical"}
    assert "bsp_low_ew" in names and all(supports(n, "perishable") for n in names)


def test_short_life_suite():
    s = load_suite("perishable-short-life")
    assert len(s.instances) == 8
    assert {(i.lead_time, i.outdating_cost, i.issuing) for i in s.instances} == {
        (L, w, k) for L in (1, 2) for w in (7.0, 10.0) for k in ("fifo", "lifo")}
    for i in s.instances:
        assert (i.shelf_life, i.holding_cost, i.shortage_cost, i.unit_order_cost, i.order_cap_units) == (2, 1.0, 5.0, 3.0, 10)
    names = {p.name for p in s.policies if p.kind == "classical"}
    assert {"bsp_low_ew", "myopic"} <= names and all(supports(n, "perishable") for n in names)
