"""Small shared helpers for tests: paths of the demo arms and arms built from plain dicts.

``arm_from_data`` (ikgen.armfile) takes the dict a TOML/JSON arm file parses to; these helpers
only assemble such dicts so that a test can state an arm in a few lines:

    arm = build_arm([joint("r", a=1, alpha=0, d=0), joint("r", a=1, alpha=0, d=0)],
                    length_unit="m", angle_unit="deg")

Nothing here computes kinematics; the tests' reference values come from their own sources.
"""

from __future__ import annotations

from pathlib import Path

from ikgen.armfile import arm_from_data, load_arm

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"
# the three spherical-wrist demos the first release shipped with
DEMO_FILES = (EXAMPLES / "benchtop6.toml", EXAMPLES / "packer6.toml", EXAMPLES / "inspector6.json")
# the demos of the structures the derivation engine added: three parallel axes (kitter6), a skewed
# shoulder solved through a quartic (canted6), the first three axes meeting (gimbal6)
STRUCTURE_DEMO_FILES = (EXAMPLES / "kitter6.toml", EXAMPLES / "canted6.toml", EXAMPLES / "gimbal6.toml")


def demo_arm(stem: str):
    """The demo arm ``stem`` ("benchtop6", "kitter6", ...) loaded from examples/."""
    [path] = [p for p in sorted(EXAMPLES.glob(f"{stem}.*")) if p.suffix in (".toml", ".json")]
    return load_arm(path)


def joint(kind: str = "r", a=0, alpha=0, d=0, theta=0, name: str | None = None, **extra) -> dict:
    """One [[joint]] entry; ``kind`` is "r"/"revolute" or "p"/"prismatic".

    A prismatic joint gets limits [-1000, 1000] unless ``limits`` is passed in ``extra``
    (the file schema requires them); ``extra`` may also hold offset, direction, limits.
    """
    kind = {"r": "revolute", "p": "prismatic"}.get(kind, kind)
    entry = {"type": kind, "a": a, "alpha": alpha, "d": d, "theta": theta, **extra}
    if name is not None:
        entry["name"] = name
    if kind == "prismatic":
        entry.setdefault("limits", [-1000, 1000])
    return entry


def arm_data(joints: list[dict], convention: str = "standard", length_unit: str = "m",
             angle_unit: str = "deg", base: dict | None = None, tool: dict | None = None,
             name: str = "test_arm", target: dict | None = None) -> dict:
    """The parsed-file dict of an arm; ``base``/``tool``/``target`` are [base]/[tool]/[target]
    tables or None."""
    data = {"arm": {"name": name, "convention": convention, "length_unit": length_unit,
                    "angle_unit": angle_unit},
            "joint": [dict(j) for j in joints]}
    if base is not None:
        data["base"] = base
    if tool is not None:
        data["tool"] = tool
    if target is not None:
        data["target"] = target
    return data


def build_arm(joints: list[dict], **kwargs):
    """``arm_from_data(arm_data(joints, **kwargs))``: a validated ikgen Arm."""
    return arm_from_data(arm_data(joints, **kwargs))


def pose_error_functions(chain, target, scale: float):
    """(fun, jac) for scipy.optimize.least_squares on the pose error of ``chain`` (an
    ikgen.kinematics.NumericChain) against the 4x4 ``target``: fun(q) is the 12-vector of position
    error over ``scale`` and rotation-entry errors; jac(q) is its forward-difference Jacobian with
    scipy's own default step for '2-point' (sqrt(machine epsilon) * max(1, |q_k|), signed like q_k),
    the dof + 1 poses it needs computed in one batched forward-kinematics call instead of dof + 1
    calls (the searches' time is the per-call overhead of the FK, not the arithmetic)."""
    import numpy as np
    step = np.sqrt(np.finfo(float).eps)

    def errors(poses):
        return np.concatenate([(poses[:, :3, 3] - target[:3, 3]) / scale,
                               (poses[:, :3, :3] - target[:3, :3]).reshape(len(poses), 9)], axis=1)

    def fun(q):
        return errors(chain.poses(np.asarray(q, dtype=float)[None, :]))[0]

    def jac(q):
        q = np.asarray(q, dtype=float)
        h = step * np.where(q >= 0, 1.0, -1.0) * np.maximum(1.0, np.abs(q))
        h = (q + h) - q                                    # the step as represented (as scipy does)
        e = errors(chain.poses(np.vstack([q, q + np.diag(h)])))
        return ((e[1:] - e[0]) / h[:, None]).T
    return fun, jac
