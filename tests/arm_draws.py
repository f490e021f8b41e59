"""Random arms drawn within each structure the derivation engine accepts, and their outcome.

Shared by tests/test_sweep.py (a small seeded sample) and benchmarks/sweep_arms.py (a large one).
Each structure is a function ``draw(rng) -> Arm``; every arm is invented (random numbers only).

What varies: link lengths and offsets from 0 to 1 m with some exact zeros, twists from {0, +-90}
(and general twists where the structure allows them), the DH convention (a standard table moved
over to the modified one: the modified chain of the shifted table is the standard chain without
its last a and alpha, the same structure), joint directions, zero offsets (``theta``), limits from
+-170 to +-270 deg, and half the time a tool and a base. ``outcome(arm, samples)`` is "accepted"
(generated and verified), "refused" (ikgen.errors.StructureError, with its diagnosis) or "failed"
(a generated solver that fails verification, or any other error), with a sentence.
"""

from __future__ import annotations

import time
import traceback

from helpers import build_arm, joint
from ikgen.errors import StructureError
from ikgen.generate import build, load_module
from ikgen.verify import verify


class Draw:
    """Random numbers in the shapes arm tables use."""

    def __init__(self, rng):
        self.rng = rng

    def length(self, low: float = 0.0, high: float = 1.0, zero: float = 0.25) -> float:
        """A length in [low, high] m, exactly 0 with probability ``zero`` (when low is 0)."""
        if low == 0.0 and self.rng.random() < zero:
            return 0
        return round(float(self.rng.uniform(max(low, 0.01), high)), 3)

    def signed(self, high: float = 1.0, zero: float = 0.25) -> float:
        return self.length(0.0, high, zero) * int(self.rng.choice([-1, 1]))

    def right(self, zero: bool = True) -> int:
        """A twist from {0, +-90} (from {+-90} when ``zero`` is False)."""
        return int(self.rng.choice([0, 90, -90] if zero else [90, -90]))

    def skew(self) -> int:
        """A general twist: 20..70 deg, not a multiple of 15, either sign."""
        value = int(self.rng.integers(20, 71))
        value += 1 if value % 15 == 0 else 0
        return value * int(self.rng.choice([-1, 1]))

    def revolute(self, a, alpha, d) -> dict:
        span = int(self.rng.choice([170, 180, 200, 270]))
        return joint("r", a=a, alpha=alpha, d=d, theta=int(self.rng.integers(-4, 5)) * 30,
                     direction=int(self.rng.choice([-1, 1])), limits=[-span, span])

    def slide(self, a, alpha, theta, low: float = 0.0) -> dict:
        start = round(float(self.rng.uniform(low, low + 0.2)), 3)
        return joint("p", a=a, alpha=alpha, d=0, theta=theta, direction=int(self.rng.choice([-1, 1])),
                     limits=[start, round(start + float(self.rng.uniform(0.3, 0.8)), 3)])

    def frame(self, rotate: bool = True, along_z: bool = False) -> dict | None:
        """A [base] or [tool] table half the time: a translation (along z only when ``along_z``),
        and (if ``rotate``) a rotation."""
        if self.rng.random() < 0.5:
            return None
        table = {"translation": [0, 0, self.signed(0.2, 0.4)] if along_z else [self.signed(0.2, 0.4) for _ in range(3)]}
        if rotate and self.rng.random() < 0.7:
            table["rotation"] = {"axes": "zyx", "frame": "moving",
                                 "angles": [round(float(a), 1) for a in self.rng.uniform(-180, 180, 3)]}
        return table


def arm_of(draw: Draw, joints: list[dict], name: str, modified_ok: bool = True, tool_rotation: bool = True,
           base_rotation: bool = True, tool_along_z: bool = False):
    """The arm of a standard DH table, moved over to the modified convention half the time."""
    convention = "standard"
    if modified_ok and draw.rng.random() < 0.5:
        convention = "modified"
        shifted = [dict(j) for j in joints]
        for i in range(len(joints) - 1, -1, -1):
            shifted[i]["a"], shifted[i]["alpha"] = (joints[i - 1]["a"], joints[i - 1]["alpha"]) if i else (0, 0)
        joints = shifted
    return build_arm(joints, convention=convention, length_unit="m", angle_unit="deg",
                     tool=draw.frame(tool_rotation, tool_along_z), base=draw.frame(base_rotation), name=name)


# ----------------------------------------------------------------------------- six-axis arms

def wrist(draw: Draw) -> list[dict]:
    """Axes 4, 5, 6 meeting (standard DH: a4 = a5 = d5 = 0, twists of +-90)."""
    return [draw.revolute(0, draw.right(False), draw.length()), draw.revolute(0, draw.right(False), 0),
            draw.revolute(0, 0, draw.length())]


def spherical_right(draw: Draw):
    """A spherical wrist; the shoulder's twists from {0, +-90}, its lengths and offsets random."""
    shoulder = [draw.revolute(draw.length(), draw.right(), draw.length()),
                draw.revolute(draw.length(), draw.right(), draw.length()),
                draw.revolute(draw.length(), draw.right(False), draw.length())]
    return arm_of(draw, shoulder + wrist(draw), "drawn_sw")


def spherical_skew(draw: Draw):
    """A spherical wrist; general twists between axes 1-2 and 2-3."""
    shoulder = [draw.revolute(draw.length(), draw.skew(), draw.length()),
                draw.revolute(draw.length(), draw.skew(), draw.length()),
                draw.revolute(draw.length(0.01, 0.1), draw.right(False), draw.length())]
    return arm_of(draw, shoulder + wrist(draw), "drawn_sws")


def parallel_offset_wrist(draw: Draw):
    """Axes 2, 3, 4 parallel, wrist axes offset (the last three do not meet)."""
    joints = [draw.revolute(0, draw.right(False), draw.length(0.05)),
              draw.revolute(draw.length(0.05), 0, draw.length()),
              draw.revolute(draw.length(0.05), 0, 0),
              draw.revolute(0, draw.right(False), draw.length(0.05)),
              draw.revolute(0, draw.right(False), draw.length(0.05)),
              draw.revolute(0, 0, draw.length())]
    return arm_of(draw, joints, "drawn_par")


def first_three_meet(draw: Draw):
    """Axes 1, 2, 3 meet (standard DH: a1 = a2 = d2 = 0), the last three general."""
    joints = [draw.revolute(0, draw.right(False), draw.length()), draw.revolute(0, draw.right(False), 0),
              draw.revolute(draw.length(0.05), draw.skew(), 0), draw.revolute(draw.length(0.05), draw.skew(), draw.length()),
              draw.revolute(draw.length(0.01, 0.1), draw.right(False), draw.length()), draw.revolute(0, 0, draw.length())]
    return arm_of(draw, joints, "drawn_base", modified_ok=False)


# ----------------------------------------------------------------------------- shorter arms

def rrr(draw: Draw):
    joints = [draw.revolute(draw.length(0, 0.2), draw.right(False), draw.length(0.05)),
              draw.revolute(draw.length(0.05), 0, draw.signed(0.2)), draw.revolute(draw.length(0.05), 0, 0)]
    return arm_of(draw, joints, "drawn_rrr")


def rrp(draw: Draw):
    joints = [draw.revolute(draw.length(0, 0.1), draw.right(False), draw.length(0.05)),
              draw.revolute(0, draw.right(False), draw.length(0, 0.2)), draw.slide(0, 0, 0, 0.05)]
    return arm_of(draw, joints, "drawn_rrp")


def rpp(draw: Draw):
    joints = [draw.revolute(0, 0, draw.length(0.05)), draw.slide(0, draw.right(False), 0), draw.slide(0, 0, 0, 0.05)]
    return arm_of(draw, joints, "drawn_rpp")


def ppp(draw: Draw):
    joints = [draw.slide(0, -90, 0), draw.slide(0, -90, -90), draw.slide(0, 0, 0)]
    return arm_of(draw, joints, "drawn_ppp")


def scara_rrpr(draw: Draw):
    joints = [draw.revolute(draw.length(0.05), 0, draw.length(0.05)), draw.revolute(draw.length(0.05), 180, 0),
              draw.slide(0, 0, 0), draw.revolute(0, 0, draw.length())]
    return arm_of(draw, joints, "drawn_rrpr", modified_ok=False, tool_rotation=False, base_rotation=False)


def scara_rrrp(draw: Draw):
    joints = [draw.revolute(draw.length(0.05), 0, draw.length(0.05)), draw.revolute(draw.length(0.05), 0, 0),
              draw.revolute(0, 0, 0), joint("p", a=0, alpha=0, theta=0, limits=[-round(float(draw.rng.uniform(.1, .3)), 3), 0])]
    return arm_of(draw, joints, "drawn_rrrp", modified_ok=False, tool_rotation=False, base_rotation=False)


def point_direction_5r(draw: Draw):
    """Axes 4 and 5 meeting, the tool point on the tool's z axis through that point (a tool moved
    along z only): the wrist point on the tool axis. A tool point off that axis leaves the general 5R,
    which is refused."""
    joints = [draw.revolute(0, 90, draw.length(0.05)), draw.revolute(draw.length(0.05), 0, 0),
              draw.revolute(draw.length(0, 0.1), 90, 0), draw.revolute(0, -90, draw.length(0.05)), draw.revolute(0, 90, 0)]
    return arm_of(draw, joints, "drawn_5r", modified_ok=False, tool_rotation=False, tool_along_z=True)


STRUCTURES = {
    "spherical wrist, twists 0/+-90": spherical_right,
    "spherical wrist, general shoulder twists": spherical_skew,
    "three parallel axes, offset wrist": parallel_offset_wrist,
    "first three axes meeting": first_three_meet,
    "RRR": rrr, "RRP": rrp, "RPP": rpp, "PPP": ppp,
    "SCARA RRPR": scara_rrpr, "SCARA RRRP": scara_rrrp, "5R point and direction": point_direction_5r,
}


def outcome(arm, samples: int, seed: int = 2026) -> tuple[str, str, float]:
    """("accepted" | "refused" | "failed", a sentence, seconds) for one arm."""
    started = time.perf_counter()
    try:
        result = build(arm)
    except StructureError as error:
        return "refused", str(error).splitlines()[0], time.perf_counter() - started
    except Exception:                                        # noqa: BLE001 - any other error is a failure
        return "failed", "build raised: " + traceback.format_exc(limit=3), time.perf_counter() - started
    try:
        module = load_module(result.files[result.python_path], f"{arm.name}_sweep_ik")
        report = verify(arm, module, samples=samples, seed=seed)
    except Exception:                                        # noqa: BLE001
        return "failed", "verify raised: " + traceback.format_exc(limit=3), time.perf_counter() - started
    if report.failures:
        return "failed", "; ".join(report.failures), time.perf_counter() - started
    return "accepted", f"worst {report.worst_position:.2g} {arm.length_unit}, {report.worst_rotation:.2g} rad", \
        time.perf_counter() - started


def arm_text(arm) -> str:
    """The arm's table in a line per joint, to reproduce a failure."""
    rows = [f"{arm.name} ({arm.convention}; angles in rad)"]
    for j in arm.joints:
        rows.append(f"  {j.kind} a={float(j.a):g} alpha={float(j.alpha):.6g} d={float(j.d):g} theta={float(j.theta):.6g} "
                    f"offset={float(j.offset):.6g} direction={j.direction} limits={[round(v, 6) for v in j.limits]}")
    rows.append(f"  base={arm.base.tolist() if hasattr(arm.base, 'tolist') else arm.base}")
    rows.append(f"  tool={arm.tool.tolist() if hasattr(arm.tool, 'tolist') else arm.tool}")
    return "\n".join(rows)
