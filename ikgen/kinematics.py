"""Forward kinematics: numeric (numpy, batched) and symbolic (sympy, exact).

One link transform per DH convention (Craig, *Introduction to Robotics*, 3rd ed., sec. 3.4 for
the modified form; Spong, Hutchinson, Vidyasagar, *Robot Modeling and Control*, 1st ed.,
sec. 3.2 for the standard form):

    standard (distal):    A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i)
    modified (proximal):  A_i = Rx(alpha_i) Tx(a_i) Rz(theta_i) Tz(d_i)

where, in the modified convention, row i of the file holds the a and alpha that precede joint i.
The tool pose is ``base @ A_1 @ ... @ A_n @ tool``.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from .model import Arm, Joint

POSE_CHUNK = 4096   # readings per part in NumericChain.poses (1e6 readings of benchtop6: 1.1-1.5 s in parts of 1,024-8,192, 4.7 s at once)


def numeric_links(standard: bool, a, alpha, d, theta) -> np.ndarray:
    """(..., n, 4, 4) DH link transforms, numeric, from (..., n) arrays of theta and d and the
    (n,) a and alpha (``standard``: the distal form, else the modified one)."""
    ct, st = np.cos(theta), np.sin(theta)
    ca, sa = np.cos(alpha), np.sin(alpha)
    a = np.broadcast_to(a, ct.shape)
    out = np.zeros(ct.shape + (4, 4))
    if standard:
        out[..., 0, 0], out[..., 0, 1], out[..., 0, 2], out[..., 0, 3] = ct, -st * ca, st * sa, a * ct
        out[..., 1, 0], out[..., 1, 1], out[..., 1, 2], out[..., 1, 3] = st, ct * ca, -ct * sa, a * st
        out[..., 2, 1], out[..., 2, 2], out[..., 2, 3] = sa, ca, d
    else:
        out[..., 0, 0], out[..., 0, 1], out[..., 0, 3] = ct, -st, a
        out[..., 1, 0], out[..., 1, 1], out[..., 1, 2], out[..., 1, 3] = st * ca, ct * ca, -sa, -sa * d
        out[..., 2, 0], out[..., 2, 1], out[..., 2, 2], out[..., 2, 3] = st * sa, ct * sa, ca, ca * d
    out[..., 3, 3] = 1.0
    return out


def link_matrix(convention: str, a, alpha, d, theta) -> sp.Matrix:
    """The 4x4 DH link transform, exact (sympy) for the given convention."""
    return link_from_cos_sin(convention, a, sp.cos(alpha), sp.sin(alpha), d, sp.cos(theta), sp.sin(theta))


def link_from_cos_sin(convention: str, a, ca, sa, d, ct, st) -> sp.Matrix:
    """The DH link transform from the cosines and sines of alpha and theta (symbols allowed)."""
    if convention == "standard":
        return sp.Matrix([[ct, -st * ca, st * sa, a * ct],
                          [st, ct * ca, -ct * sa, a * st],
                          [0, sa, ca, d],
                          [0, 0, 0, 1]])
    return sp.Matrix([[ct, -st, 0, a],
                      [st * ca, ct * ca, -sa, -sa * d],
                      [st * sa, ct * sa, ca, ca * d],
                      [0, 0, 0, 1]])


def joint_dh_values(joint: Joint, reading):
    """(theta_i, d_i) of the joint for a reading in internal units (radians or length)."""
    variable = joint.offset + joint.direction * reading
    if joint.revolute:
        return joint.theta + variable, joint.d
    return joint.theta, joint.d + variable


# ------------------------------------------------------------------------------- symbolic

def symbolic_link(arm: Arm, joint: Joint, reading) -> sp.Matrix:
    """Exact link transform of ``joint`` with ``reading`` (sympy, internal units)."""
    theta, d = joint_dh_values(joint, reading)
    return link_matrix(arm.convention, joint.a, joint.alpha, d, theta)


def reading_symbols(arm: Arm) -> list[sp.Symbol]:
    return [sp.Symbol(f"q{j.index}", real=True) for j in arm.joints]


def symbolic_pose(arm: Arm, readings=None, include_base_tool: bool = True) -> sp.Matrix:
    """Exact tool pose as a sympy matrix in the joint readings (internal units: radians, length)."""
    readings = reading_symbols(arm) if readings is None else readings
    result = sp.Matrix(arm.base) if include_base_tool else sp.eye(4)
    for joint, reading in zip(arm.joints, readings):
        result = result * symbolic_link(arm, joint, reading)
    if include_base_tool:
        result = result * sp.Matrix(arm.tool)
    return result


# -------------------------------------------------------------------------------- numeric

class NumericChain:
    """Numeric forward kinematics of one arm, vectorised over many joint vectors."""

    def __init__(self, arm: Arm):
        self.arm = arm
        self.standard = arm.convention == "standard"
        self.a = np.array([float(j.a) for j in arm.joints])
        self.alpha = np.array([float(j.alpha) for j in arm.joints])
        self.d = np.array([float(j.d) for j in arm.joints])
        self.theta = np.array([float(j.theta) for j in arm.joints])
        self.offset = np.array([float(j.offset) for j in arm.joints])
        self.direction = np.array([float(j.direction) for j in arm.joints])
        self.revolute = np.array([j.revolute for j in arm.joints])
        self.scales = arm.reading_scales()
        self.base = np.array(arm.base.evalf(), dtype=float)
        self.tool = np.array(arm.tool.evalf(), dtype=float)

    def link_transforms(self, readings) -> np.ndarray:
        """(N, dof, 4, 4) link transforms for (N, dof) readings in user units."""
        q = np.atleast_2d(np.asarray(readings, dtype=float)) * self.scales
        variable = self.offset + self.direction * q
        theta = np.where(self.revolute, self.theta + variable, self.theta)
        d = np.where(self.revolute, self.d, self.d + variable)
        return numeric_links(self.standard, self.a, self.alpha, d, theta)

    def frames(self, readings) -> np.ndarray:
        """(N, dof+1, 4, 4): frame 0 (the base of the chain) to frame n (the flange), in the world."""
        links = self.link_transforms(readings)
        n = links.shape[0]
        result = np.empty((n, self.arm.dof + 1, 4, 4))
        current = np.broadcast_to(self.base, (n, 4, 4))
        result[:, 0] = current
        for k in range(self.arm.dof):
            current = current @ links[:, k]
            result[:, k + 1] = current
        return result

    def poses(self, readings) -> np.ndarray:
        """(N, 4, 4) tool poses in the world for (N, dof) readings in user units (in parts of
        POSE_CHUNK readings: the link transforms of a part stay in cache, and a million readings
        need no (N, dof, 4, 4) array of a gigabyte)."""
        q = np.atleast_2d(np.asarray(readings, dtype=float))
        if len(q) <= POSE_CHUNK:
            return self._poses(q)
        out = np.empty((len(q), 4, 4))
        for start in range(0, len(q), POSE_CHUNK):
            out[start:start + POSE_CHUNK] = self._poses(q[start:start + POSE_CHUNK])
        return out

    def _poses(self, readings) -> np.ndarray:
        links = self.link_transforms(readings)
        current = np.broadcast_to(self.base, (links.shape[0], 4, 4))
        for k in range(self.arm.dof):
            current = current @ links[:, k]
        return current @ self.tool

    def pose(self, readings) -> np.ndarray:
        """4x4 tool pose for one joint vector in user units."""
        return self.poses(np.asarray(readings, dtype=float)[None, :])[0]

    def joint_axes(self, readings) -> tuple[np.ndarray, np.ndarray]:
        """(origins, directions), each (dof, 3): each joint's axis line in the world frame.

        Standard DH: joint i moves about/along z of frame i-1. Modified DH: about/along z of frame i.
        """
        frames = self.frames(np.asarray(readings, dtype=float)[None, :])[0]
        chosen = frames[:-1] if self.standard else frames[1:]
        return chosen[:, :3, 3].copy(), chosen[:, :3, 2].copy()


def forward(arm: Arm, readings) -> np.ndarray:
    """Tool pose (4x4 numpy) of ``arm`` for one joint vector in user units."""
    return NumericChain(arm).pose(readings)
