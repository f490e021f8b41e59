"""Configuration labels: the vocabulary is the documented one, and on every demo arm the label a
solver reports for a source configuration equals the label computed from the forward kinematics
by the formula of docs/derivation.md, section 4.

The formulas are implemented here again, from the generic forward kinematics (ikgen.kinematics,
the DH link transforms of Craig, Introduction to Robotics, 3rd ed., sec. 3.4, and Spong,
Hutchinson and Vidyasagar, Robot Modeling and Control, 1st ed., sec. 3.2), with numpy only; the
engine's own label code is not used. The triple products are the usual orientation tests of
vector geometry (common practice).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from helpers import EXAMPLES, ROOT
from ikgen.kinematics import NumericChain
from ikgen.verify import angle_gap

DEMOS = sorted(p.stem for p in EXAMPLES.iterdir() if p.suffix in (".toml", ".json"))

# The documented vocabulary (docs/derivation.md, section 4): a change here must be deliberate.
VOCABULARY = {"reach": ("reach_forward", "reach_backward"),
              "elbow": ("elbow_up", "elbow_down"),
              "wrist_bend": ("bend_positive", "bend_negative"),
              "base_bend": ("bend_positive", "bend_negative")}
OLD_WORDS = ("front", "back", "noflip", "flip")        # the trio the labels replaced (issue: our own words)


def nearest_point(o1, d1, o2, d2):
    """The point of line 1 nearest line 2."""
    b = np.einsum("ni,ni->n", d1, d2)
    w0 = o1 - o2
    d, e = np.einsum("ni,ni->n", d1, w0), np.einsum("ni,ni->n", d2, w0)
    t = (b * e - d) / (1 - b * b)
    return o1 + t[:, None] * d1


def geometry(chain: NumericChain, readings: np.ndarray) -> dict:
    """Every label's measure, from FK frames (joint i's axis is z of frame i-1 in the standard
    convention, of frame i in the modified one)."""
    frames = chain.frames(readings)
    axis_frames = frames[:, :-1] if chain.standard else frames[:, 1:]
    o, z = axis_frames[:, :, :3, 3], axis_frames[:, :, :3, 2]
    x1 = frames[:, 1, :3, 0]
    wrist = nearest_point(o[:, 5], z[:, 5], o[:, 4], z[:, 4])
    e = nearest_point(o[:, 3], z[:, 3], o[:, 4], z[:, 4])
    z2 = z[:, 1]
    u = e - o[:, 1]
    v = o[:, 2] - o[:, 1]
    u = u - np.einsum("ni,ni->n", u, z2)[:, None] * z2
    v = v - np.einsum("ni,ni->n", v, z2)[:, None] * z2
    above = np.einsum("ni,ni->n", v, z[:, 0]) * np.einsum("ni,ni->n", u, u) - \
        np.einsum("ni,ni->n", v, u) * np.einsum("ni,ni->n", u, z[:, 0])
    return {"reach": np.einsum("ni,ni->n", wrist - o[:, 0], x1),
            "bend": np.einsum("ni,ni->n", np.cross(v, u - v), z2), "above": above,
            "wrist_bend": np.einsum("ni,ni->n", np.cross(z[:, 3], z[:, 5]), z[:, 4]),
            "base_bend": np.einsum("ni,ni->n", np.cross(z[:, 0], z[:, 2]), z[:, 1])}


@pytest.fixture(scope="module", params=DEMOS)
def demo(request, built):
    from ikgen.generate import load_module
    result = built(next(p for p in EXAMPLES.glob(f"{request.param}.*") if p.suffix in (".toml", ".json")))
    module = load_module(result.files[result.python_path], f"{request.param}_labels_under_test")
    return result.arm, module


def test_the_vocabulary_is_the_documented_one(demo):
    arm, module = demo
    for name, values in zip(module.LABEL_NAMES, module.LABEL_VALUES):
        assert VOCABULARY[name] == tuple(values), name
        assert not set(values) & set(OLD_WORDS)


def test_the_documentation_defines_every_label():
    text = (ROOT / "docs" / "derivation.md").read_text(encoding="utf-8")
    for name, (first, second) in VOCABULARY.items():
        assert re.search(rf"^\| `{name}` \| `{first}` / `{second}` \| .*\S", text, re.M), name
    for word in OLD_WORDS:
        assert f"`{word}`" not in text


def test_each_label_follows_its_formula(demo):
    """For seeded source configurations, the label of the solution equal to the source is the one
    the formula gives (cases with a measure within 1e-9 of 0 skipped, at most 1 %)."""
    arm, module = demo
    chain = NumericChain(arm)
    rng = np.random.default_rng(1812)
    limits = arm.limits_in_readings()
    readings = limits[:, 0] + rng.random((600, arm.dof)) * (limits[:, 1] - limits[:, 0])
    labels, kept = [], []
    for q, pose in zip(readings, chain.poses(readings)):
        solutions = module.inverse(pose, limits="ignore")
        matches = [s for s in solutions if angle_gap(np.array([s[0]]), q, arm).max() < 1e-6]
        if matches:
            labels.append(matches[0][1])
            kept.append(q)
    assert len(kept) > 500
    labels, kept = np.array(labels), np.array(kept)
    g = geometry(chain, kept)
    length = arm.reach_scale()
    small = {"reach": 1e-9 * length, "elbow": 1e-9 * length ** 2, "wrist_bend": 1e-9, "base_bend": 1e-9}
    for index, name in enumerate(module.LABEL_NAMES):
        first, second = module.LABEL_VALUES[index]
        if name == "elbow":
            # the documented orientation: elbow_up is above the line from axis 2 to E when the arm
            # reaches forward; one sign of the bend fits that on (nearly) every such configuration
            clear = (g["reach"] > 1e-9 * length) & (np.abs(g["above"]) > 1e-9 * length ** 3) & \
                (np.abs(g["bend"]) > small["elbow"])
            sign = np.sign(np.sum(np.sign(g["bend"][clear]) * np.sign(g["above"][clear])))
            assert sign != 0
            measure = sign * g["bend"]
        else:
            measure = g[name]
        clear = np.abs(measure) > small[name]
        expected = np.where(measure >= 0, first, second)
        wrong = np.nonzero(clear & (expected != labels[:, index]))[0]
        assert len(wrong) == 0, f"{arm.name} {name}: {len(wrong)} of {clear.sum()} disagree, e.g. {kept[wrong[0]]}"
        assert clear.sum() >= 0.99 * len(kept)
        assert set(labels[clear, index]) == {first, second}     # both values met
