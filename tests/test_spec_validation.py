"""Instance specs: TOML round trip and one-line errors naming the field and the allowed range."""
import pytest

from invbench import SpecError, load_spec
from invbench.envs.demand import Demand

BASE = {"model": "lost_sales", "lead_time": 2, "demand": {"distribution": "poisson", "mean": 5.0}}


def test_toml_round_trip(tmp_path):
    spec = load_spec({**BASE, "name": "bike-chain-L2", "max_order": 20, "case_pack": 2, "fixed_order_cost": 3.5})
    path = tmp_path / "i.toml"
    spec.save(path)
    again = load_spec(path)
    assert again == spec
    assert again.order_sizes_units.tolist() == list(range(0, 21, 2))


@pytest.mark.parametrize("change,field", [
    ({"lead_time": -1}, "instance.lead_time"),
    ({"lead_time": 1.5}, "instance.lead_time"),
    ({"holding_cost": -1.0}, "instance.holding_cost"),
    ({"shortage_cost": "high"}, "instance.shortage_cost"),
    ({"discount": 1.5}, "instance.discount"),
    ({"discount": 0.0}, "instance.discount"),
    ({"case_pack": 0}, "instance.case_pack"),
    ({"max_order": 0}, "instance.max_order"),
    ({"max_order": 3, "case_pack": 4}, "instance.max_order"),
    ({"model": "lost"}, "instance.model"),
    ({"colour": "red"}, "instance.colour"),
    ({"holding_cost": float("nan")}, "instance.holding_cost"),
    ({"demand": {"distribution": "poisson", "mean": -2.0}}, "demand.mean"),
    ({"demand": {"distribution": "poisson", "mean": float("nan")}}, "demand.mean"),
    ({"demand": {"distribution": "negative_binomial", "mean": 5.0, "variance": 4.0}}, "demand.variance"),
    ({"demand": {"distribution": "binomial", "n": 10, "p": 1.2}}, "demand.p"),
    ({"demand": {"distribution": "empirical", "counts": []}}, "demand.counts"),
    ({"demand": {"distribution": "empirical", "pmf": [0.5, 0.6]}}, "demand.pmf"),
    ({"demand": {"distribution": "empirical", "pmf": [0.5, float("nan")]}}, "demand.pmf"),
    ({"demand": {"distribution": "zipf", "a": 2}}, "demand.distribution"),
    ({"demand": {"distribution": "poisson", "mean": 5, "sd": 1}}, "demand.sd"),
])
def test_bad_values_name_the_field(change, field):
    with pytest.raises(SpecError) as e:
        load_spec({**BASE, **change})
    msg = str(e.value)
    assert msg.startswith(field), msg
    assert "\n" not in msg


def test_missing_file_and_bad_toml(tmp_path):
    with pytest.raises(SpecError, match="spec file"):
        load_spec(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[instance\nmodel=")
    with pytest.raises(SpecError, match="not valid TOML"):
        load_spec(bad)


def test_default_order_cap_is_twice_the_largest_demand():
    spec = load_spec(BASE)
    assert spec.order_cap_units == 2 * Demand.from_dict(BASE["demand"]).pmf().support_max
