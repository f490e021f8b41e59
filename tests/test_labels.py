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
from ikgen.verify import angle_gap, given_of

DEMOS = sorted(p.stem for p in EXAMPLES.iterdir() if p.suffix in (".toml", ".json"))

# The documented vocabulary (docs/derivation.md, section 4): a change here must be deliberate.
VOCABULARY = {"reach": ("reach_forward", "reach_backward"),
              "elbow": ("elbow_up", "elbow_down"),
              "elbow_turn": ("counterclockwise", "clockwise"),
              "wrist_bend": ("bend_positive", "bend_negative"),
              "base_bend": ("bend_positive", "bend_negative"),
              "elbow_bend": ("bend_positive", "bend_negative")}
ROOT_VALUES = ("root_plus", "root_minus")
OLD_WORDS = ("front", "back", "noflip", "flip")        # the trio the labels replaced (issue: our own words)


def nearest_point(o1, d1, o2, d2):
    """The point of line 1 nearest line 2 (o1 itself when they are parallel)."""
    b = np.einsum("ni,ni->n", d1, d2)
    w0 = o1 - o2
    d, e = np.einsum("ni,ni->n", d1, w0), np.einsum("ni,ni->n", d2, w0)
    parallel = np.abs(1 - b * b) < 1e-12
    t = np.where(parallel, 0.0, (b * e - d) / np.where(parallel, 1.0, 1 - b * b))
    return o1 + t[:, None] * d1


def parallel(z, i, j):
    return np.linalg.norm(np.cross(z[0, i - 1], z[0, j - 1])) < 1e-9


def geometry(chain: NumericChain, readings: np.ndarray, module) -> dict:
    """Every label's measure by the rules of docs/derivation.md, section 4, from FK frames (joint
    i's axis is z of frame i-1 in the standard convention, of frame i in the modified one)."""
    frames = chain.frames(readings)
    axis_frames = frames[:, :-1] if chain.standard else frames[:, 1:]
    o, z = axis_frames[:, :, :3, 3], axis_frames[:, :, :3, 2]
    tool = frames[:, -1] @ chain.tool
    n = chain.arm.dof
    target = module.TARGET
    x1 = frames[:, 1, :3, 0]

    def bend(i, j, k):
        return np.einsum("ni,ni->n", np.cross(z[:, i - 1], z[:, k - 1]), z[:, j - 1])
    if n == 7:                        # a seven-axis arm with a given joint: the three bends
        return {"base_bend": bend(1, 2, 3), "elbow_bend": bend(3, 4, 5), "wrist_bend": bend(5, 6, 7)}

    def meet(a, b):
        return nearest_point(o[:, a - 1], z[:, a - 1], o[:, b - 1], z[:, b - 1])

    wrist = meet(n, n - 1) if target in ("pose", "point_and_direction") else tool[:, :3, 3]
    out = {"reach": np.einsum("ni,ni->n", wrist - o[:, 0], x1)}
    if n == 6 and target == "pose":
        s = 2
    else:
        s = next((k for k in (1, 2) if parallel(z, k, k + 1)), None)
    if s is None:                     # no elbow pair (e.g. pan, tilt and a boom): no elbow label
        pass
    elif target in ("pose", "point_and_direction") and s + 3 <= n:
        e = meet(s + 2, s + 3)
    elif target == "point_and_angle":
        e = meet(n, n - 1)
    else:
        e = tool[:, :3, 3]
    if s is not None:
        zs = z[:, s - 1]
        u = e - o[:, s - 1]
        v = o[:, s] - o[:, s - 1]
        u = u - np.einsum("ni,ni->n", u, zs)[:, None] * zs
        v = v - np.einsum("ni,ni->n", v, zs)[:, None] * zs
        bend = np.cross(v, u - v)
        out["bend"] = np.einsum("ni,ni->n", bend, zs)
        out["above"] = np.einsum("ni,ni->n", v, z[:, 0]) * np.einsum("ni,ni->n", u, u) - \
            np.einsum("ni,ni->n", v, u) * np.einsum("ni,ni->n", u, z[:, 0])
        if target == "point_and_angle":
            out["elbow_turn"] = bend @ np.array(module.TARGET_AXIS)   # counterclockwise about the target's axis
    third = z[:, 5] if n == 6 else tool[:, :3, "xyz".index(getattr(module, "TOOL_AXIS", "z"))]
    if n >= 5:
        out["wrist_bend"] = np.einsum("ni,ni->n", np.cross(z[:, 3], third), z[:, 4])
    out["base_bend"] = np.einsum("ni,ni->n", np.cross(z[:, 0], z[:, 2]), z[:, 1])
    return out


@pytest.fixture(scope="module", params=DEMOS)
def demo(request, built):
    from ikgen.generate import load_module
    result = built(next(p for p in EXAMPLES.glob(f"{request.param}.*") if p.suffix in (".toml", ".json")))
    module = load_module(result.files[result.python_path], f"{request.param}_labels_under_test")
    return result.arm, module


def test_the_vocabulary_is_the_documented_one(demo):
    arm, module = demo
    for name, values in zip(module.LABEL_NAMES, module.LABEL_VALUES):
        if name.startswith("root_"):
            assert tuple(values) == ROOT_VALUES and name[5:].isdigit(), name
        else:
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
        solutions = module.inverse(pose, *given_of(arm, q), limits="ignore")
        matches = [s for s in solutions if angle_gap(np.array([s[0]]), q, arm).max() < 1e-6]
        if matches:
            labels.append(matches[0][1])
            kept.append(q)
    assert len(kept) > 500
    labels, kept = np.array(labels), np.array(kept)
    g = geometry(chain, kept, module)
    length = arm.reach_scale()
    small = {"reach": 1e-9 * length, "elbow": 1e-9 * length ** 2, "elbow_turn": 1e-9 * length ** 2,
             "wrist_bend": 1e-9, "base_bend": 1e-9, "elbow_bend": 1e-9}
    for index, name in enumerate(module.LABEL_NAMES):
        first, second = module.LABEL_VALUES[index]
        if name.startswith("root_"):          # no geometric formula: the root's sign in the report
            continue
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
