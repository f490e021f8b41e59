"""Compile a generated C solver into an importable Python extension with cffi (API mode).

``compile_solver(arm)`` renders the C files, builds them into a temporary (or given) folder and
returns a ``CSolver`` with the same functions as the generated Python module: ``forward(joints)``
and ``inverse(pose, current=None)`` returning ``(joints, config, singular)`` tuples with the same
labels and in the same order, plus ``inverse_many(poses)`` that loops in C over N poses.
"""

from __future__ import annotations

import importlib.util
import sys
import tempfile
from pathlib import Path

import numpy as np

from .backends import c as c_backend
from .backends.common import environment
from .errors import IkgenError
from .families import derive_arm
from .ir import Derivation
from .model import Arm


class CSolver:
    """A compiled solver: numpy or nested lists in, the Python back-end's solution tuples out."""

    def __init__(self, module, arm: Arm, derivation: Derivation, scalar, folder: Path):
        self.ffi, self.lib = module.ffi, module.lib
        self.arm = arm
        self.scalar = scalar
        self.folder = folder
        self.prefix = c_backend.names(arm, scalar)["prefix"]
        self.dtype = np.float64 if scalar.name == "double" else np.float32
        self.labels = [(l.positive, l.negative) for l in derivation.labels]
        self.max_solutions = derivation.max_solutions
        self.dof = arm.dof
        self._forward = getattr(self.lib, f"{self.prefix}_forward")
        self._inverse = getattr(self.lib, f"{self.prefix}_inverse")
        self._many = getattr(self.lib, f"{self.prefix}_inverse_many")
        self._solutions = self.ffi.new(f"{self.prefix}_solution[{self.max_solutions}]")
        self._status = self.ffi.new(f"{self.prefix}_status *")

    def _pointer(self, array: np.ndarray):
        return self.ffi.cast(f"{self.scalar.name} *", self.ffi.from_buffer(array))

    def forward(self, joints) -> list[list[float]]:
        q = np.ascontiguousarray(joints, dtype=self.dtype)
        pose = np.zeros(16, dtype=self.dtype)
        self._forward(self._pointer(q), self._pointer(pose))
        return pose.reshape(4, 4).astype(float).tolist()

    def inverse(self, pose, current=None) -> list[tuple]:
        flat = np.ascontiguousarray(np.asarray(pose, dtype=self.dtype)[:4].reshape(-1)[:16])
        if flat.size == 12:
            flat = np.concatenate([flat, np.array([0, 0, 0, 1], dtype=self.dtype)])
        hint = self.ffi.NULL
        if current is not None:
            keep = np.ascontiguousarray(current, dtype=self.dtype)
            hint = self._pointer(keep)
        count = self._inverse(self._pointer(flat), hint, self._solutions, self._status)
        out = []
        for k in range(count):
            solution = self._solutions[k]
            joints = tuple(float(solution.joints[i]) for i in range(self.dof))
            config = tuple(negative if solution.config & (1 << i) else positive
                           for i, (positive, negative) in enumerate(self.labels))
            out.append((joints, config, bool(solution.singular)))
        return out

    def status(self) -> int:
        """Status of the last inverse() call: 0 ok, 1 unreachable, 2 invalid input."""
        return int(self._status[0])

    def inverse_many(self, poses) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(joints N x max x dof, counts N, config N x max, singular N x max) for N x 4 x 4 poses."""
        poses = np.ascontiguousarray(np.asarray(poses, dtype=self.dtype).reshape(-1, 16))
        n = poses.shape[0]
        joints = np.zeros((n, self.max_solutions, self.dof), dtype=self.dtype)
        counts = np.zeros(n, dtype=np.int32)
        config = np.zeros((n, self.max_solutions), dtype=np.uint32)
        singular = np.zeros((n, self.max_solutions), dtype=np.int32)
        self._many(n, self._pointer(poses), self._pointer(joints),
                   self.ffi.cast("int *", self.ffi.from_buffer(counts)),
                   self.ffi.cast("unsigned *", self.ffi.from_buffer(config)),
                   self.ffi.cast("int *", self.ffi.from_buffer(singular)))
        return joints, counts, config, singular


def compile_solver(arm: Arm, derivation: Derivation | None = None, scalar=c_backend.DOUBLE,
                   folder: str | Path | None = None, extra_compile_args: tuple = (),
                   extra_link_args: tuple = (), quiet: bool = True) -> CSolver:
    """Render, compile and load the C solver of ``arm``; the build lives in ``folder`` (or a temp dir)."""
    try:
        import cffi
    except ImportError as exc:  # pragma: no cover - cffi is a runtime dependency
        raise IkgenError("cffi is needed to build C extensions: pip install cffi") from exc
    derivation = derivation or derive_arm(arm)
    folder = Path(folder) if folder else Path(tempfile.mkdtemp(prefix="ikgen-c-"))
    folder.mkdir(parents=True, exist_ok=True)
    files = c_backend.render(arm, derivation, scalar)
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
    names = c_backend.names(arm, scalar)
    context = {"names": names, "real": scalar.name, "dof": arm.dof, "max": derivation.max_solutions}
    env = environment()
    cdef = env.get_template("c_cffi_cdef.h.j2").render(**context)
    glue = env.get_template("c_cffi_glue.c.j2").render(**context)
    ffi = cffi.FFI()
    ffi.cdef(cdef)
    module_name = f"_{names['prefix']}_cffi"
    ffi.set_source(module_name, glue, sources=[str(folder / names["source"])], include_dirs=[str(folder)],
                   extra_compile_args=["-O2", "-std=c99", *extra_compile_args],
                   extra_link_args=list(extra_link_args), libraries=["m"])
    try:
        if quiet:
            import contextlib
            import io
            with contextlib.redirect_stdout(io.StringIO()):
                library = ffi.compile(tmpdir=str(folder), verbose=False)
        else:
            library = ffi.compile(tmpdir=str(folder), verbose=True)
    except Exception as exc:  # the compiler's own message is the useful part
        raise IkgenError(f"compiling the C solver of '{arm.name}' failed: {exc}") from None
    spec = importlib.util.spec_from_file_location(module_name, library)
    module = importlib.util.module_from_spec(spec)
    sys.modules.pop(module_name, None)
    spec.loader.exec_module(module)
    return CSolver(module, arm, derivation, scalar, folder)
