"""Export/import of learned policies: identical actions after reload; tampered files refused."""
from __future__ import annotations

import json
import os
import pickle
import stat
import struct

import numpy as np
import pytest
import torch

from invbench.agents.export import META, WEIGHTS, PolicyFileError, load_policy
from invbench.agents.learned_policy import LearnedPolicy
from invbench.agents.network import PolicyNet, architecture
from invbench.agents.scaling import Scaling
from invbench.envs.spec import spec_from_dict

torch.set_num_threads(1)
SPEC = spec_from_dict({"model": "lost_sales", "lead_time": 2, "shortage_cost": 9.0,
                       "demand": {"distribution": "poisson", "mean": 5}})
SCALING = Scaling(obs_scale=5.0, obs_shift=1.0, reward_offset=6.0, reward_scale=6.0, case_pack=1,
                  max_order_units=15, obs_clip=10.0, position_cap=30)


@pytest.fixture()
def exported(tmp_path):
    torch.manual_seed(0)
    net = PolicyNet(architecture(2, (16, 16), 16, "tanh", "logits"))
    pol = LearnedPolicy(SPEC, SCALING, net, agent="test")
    d = tmp_path / "pol"
    pol.save(d, measured={"cost": 1.0})
    return pol, d


def _states() -> np.ndarray:
    return np.random.default_rng(0).integers(0, 25, size=(2000, 2))


def test_reload_gives_identical_actions(exported):
    pol, d = exported
    back = load_policy(d, SPEC)
    np.testing.assert_array_equal(back.act(_states()), pol.act(_states()))
    meta = json.loads((d / META).read_text())
    assert meta["measured"] == {"cost": 1.0} and "torch" in meta["versions"]
    assert {"instance", "scaling", "architecture", "training"} <= set(meta)


def test_edited_weights_are_refused(exported):
    _, d = exported
    blob = bytearray((d / WEIGHTS).read_bytes())
    blob[-3] ^= 0xFF  # one flipped byte inside a tensor
    (d / WEIGHTS).write_bytes(bytes(blob))
    with pytest.raises(PolicyFileError, match="checksum"):
        load_policy(d)


def test_edited_weights_header_is_refused(exported):
    _, d = exported
    blob = (d / WEIGHTS).read_bytes()
    n = struct.unpack("<Q", blob[:8])[0]
    header = blob[8:8 + n].replace(b'"F32"', b'"F64"', 1)
    (d / WEIGHTS).write_bytes(blob[:8] + header + blob[8 + n:])
    with pytest.raises(PolicyFileError):
        load_policy(d)


class _Boom:
    """A pickle payload that would create a file if anything ever unpickled it."""

    def __init__(self, target: str) -> None:
        self.target = target

    def __reduce__(self):
        return (open, (self.target, "w"))


def test_pickle_in_place_of_weights_is_refused_and_never_run(exported, tmp_path):
    _, d = exported
    target = tmp_path / "pwned"
    (d / WEIGHTS).write_bytes(pickle.dumps(_Boom(str(target))))
    with pytest.raises(PolicyFileError, match="pickle"):
        load_policy(d)
    assert not target.exists()
    torch.save({"x": torch.zeros(2)}, d / WEIGHTS)  # torch's own zip-of-pickles format
    with pytest.raises(PolicyFileError, match="pickle or zip"):
        load_policy(d)


def test_edited_policy_json_is_refused(exported):
    _, d = exported
    meta = json.loads((d / META).read_text())
    meta["architecture"]["hidden"] = [16, 8]
    (d / META).write_text(json.dumps(meta))
    with pytest.raises(PolicyFileError, match="edited after export"):
        load_policy(d)


def test_mismatched_instance_is_refused(exported):
    _, d = exported
    with pytest.raises(PolicyFileError, match="state length"):
        load_policy(d, SPEC.with_(lead_time=3))
    with pytest.raises(PolicyFileError, match="shortage_cost = 9.0 there, 19.0 here"):
        load_policy(d, SPEC.with_(shortage_cost=19.0))
    with pytest.raises(PolicyFileError, match=r"demand.mean = 5 there, 6 here.*--allow-other-instance"):
        load_policy(d, SPEC.with_(name="same-name", demand=spec_from_dict(
            {"model": "lost_sales", "demand": {"distribution": "poisson", "mean": 6}}).demand))
    assert load_policy(d, SPEC.with_(shortage_cost=19.0), allow_other_instance=True).spec.shortage_cost == 19.0


def test_instance_is_matched_by_content_not_name(exported):
    _, d = exported
    renamed = SPEC.with_(name="bicycle-chains-weekly")  # identical instance under another label
    assert load_policy(d, renamed).spec.name == "bicycle-chains-weekly"


def test_exported_files_follow_the_umask(tmp_path):
    old = os.umask(0o022)
    try:
        net = PolicyNet(architecture(2, (4,), 16, "tanh", "logits"))
        d = LearnedPolicy(SPEC, SCALING, net).save(tmp_path / "p")
    finally:
        os.umask(old)
    for name in (META, WEIGHTS):
        assert stat.S_IMODE((d / name).stat().st_mode) == 0o644, name


def test_missing_directory_and_files(tmp_path):
    with pytest.raises(PolicyFileError, match="not a directory"):
        load_policy(tmp_path / "nope")
    with pytest.raises(PolicyFileError, match="no policy.json"):
        load_policy(tmp_path)


def test_header_length_starting_with_pickle_byte_still_loads(tmp_path):
    # A safetensors header length like 0x280 makes the file start with 0x80, the pickle marker
    # (pickle protocol 2+, Python docs): such a genuine file must load, not be refused.
    for width in range(90, 130):  # two layers of width 100 give a 640-byte header here
        net = PolicyNet(architecture(2, (width, width), 16, "tanh", "logits"))
        d = tmp_path / f"w{width}"
        LearnedPolicy(SPEC, SCALING, net).save(d)
        if (d / WEIGHTS).read_bytes()[:1] == b"\x80":
            back = load_policy(d)
            np.testing.assert_array_equal(back.act(_states()), LearnedPolicy(SPEC, SCALING, net).act(_states()))
            return
    pytest.fail("no architecture gave a header length with low byte 0x80")
