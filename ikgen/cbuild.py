"""Compile a generated C solver into an importable Python extension with cffi (API mode).

``compile_solver(arm)`` renders the C files, builds them in a scratch folder, puts the results in a
temporary (or given) folder and returns a ``CSolver`` with the same functions as the generated
Python module: ``forward(joints)`` and ``inverse(pose, current=None)`` returning ``(joints,
config, singular)`` tuples with the same labels and in the same order, plus ``inverse_many(poses)``
that loops in C over N poses. Beside the extension it writes a wrapper module that needs neither
ikgen nor numpy (ikgen/cwrapper.py): ``ikgen compile`` tells users to import that one.
"""

from __future__ import annotations

import importlib.util
import json
import math
import os
import sys
import tempfile
import threading
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import NamedTuple

import numpy as np

from .backends import c as c_backend
from .backends.common import environment
from .cwrapper import CRITERIA, SolutionReader, check_criterion, given_arguments, limits_mode, pose_entries, real, vector, wanted_config
from .errors import IkgenError
from .engine import derive as derive_arm
from .ir import Derivation
from .model import Arm


MANY_PER_THREAD = 20_000   # inverse_many: poses a thread must have before another one pays off


class _Buffers(NamedTuple):
    """One thread's buffers for CSolver's per-pose calls."""
    pose: object          # <real>[16]
    solutions: object     # <prefix>_solution[max_solutions]
    status: object        # <prefix>_status *
    rows: np.ndarray | None   # readings of the readings-only entry


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
        self.label_names = [l.name for l in derivation.labels]
        self.LABEL_NAMES = tuple(self.label_names)      # as in the Python solver (verification reads it)
        from .backends.common import lower, max_solutions
        plan = lower(derivation)
        self.max_solutions = max_solutions(arm, plan)
        self.closed_form = plan.max_solutions        # solutions before multi-turn joints' equivalents
        self.conditions = len(plan.condition_blocks)
        self.dof = arm.dof
        self.given = arm.given_joint
        self.given_step = c_backend.common.given_plan(arm).step if arm.given_joint else None
        self._forward = getattr(self.lib, f"{self.prefix}_forward")
        self._inverse = getattr(self.lib, f"{self.prefix}_inverse")
        self._many = getattr(self.lib, f"{self.prefix}_inverse_many")
        self._readings = getattr(self.lib, f"{self.prefix}_inverse_joints", None)
        self._rows_type = self.ffi.typeof(f"{self.scalar.name}(*)[{self.dof}]")
        self._local = threading.local()
        self._reader = SolutionReader(self.ffi, f"{self.prefix}_solution", scalar.name, self.dof, self.labels,
                                      self.conditions)

    def _buffers(self) -> "_Buffers":
        """This thread's buffers for the per-pose calls, made on its first call: cffi releases the
        GIL during a call, so calls from several threads at once must not share them."""
        try:
            return self._local.buffers
        except AttributeError:
            self._local.buffers = _Buffers(
                self.ffi.new(f"{self.scalar.name}[16]"),
                self.ffi.new(f"{self.prefix}_solution[{self.max_solutions}]"),
                self.ffi.new(f"{self.prefix}_status *"),
                np.zeros((self.max_solutions, self.dof), dtype=self.dtype) if self._readings else None)
            return self._local.buffers

    def _pointer(self, array: np.ndarray):
        return self.ffi.cast(f"{self.scalar.name} *", self.ffi.from_buffer(array))

    def forward(self, joints) -> list[list[float]]:
        q = np.array(vector(joints, self.dof, "joints"), dtype=self.dtype)
        pose = np.zeros(16, dtype=self.dtype)
        self._forward(self._pointer(q), self._pointer(pose))
        return pose.reshape(4, 4).astype(float).tolist()

    LIMIT_MODES = {"drop": 0, "flag": 1, "ignore": 2}

    def _flat_pose(self, pose) -> np.ndarray:
        """The 16 entries of a pose; ValueError (ikgen/cwrapper.py) for a wrong shape or type."""
        if isinstance(pose, np.ndarray) and pose.dtype.kind == "f" and pose.shape in ((4, 4), (3, 4)):
            flat = np.ascontiguousarray(pose[:3], dtype=self.dtype).reshape(-1)       # the common case, fast
            return np.concatenate([flat, np.array([0, 0, 0, 1], dtype=self.dtype)])
        return np.array(pose_entries(pose), dtype=self.dtype)

    def _pose_array(self, pose, buffers: "_Buffers"):
        """The pose as a C array: nested lists are copied into this thread's pose buffer (no numpy
        on that path)."""
        if isinstance(pose, np.ndarray):
            flat = self._flat_pose(pose)     # returned too: the caller keeps it alive during the call
            return self._pointer(flat), flat
        buffers.pose[0:16] = pose_entries(pose)
        return buffers.pose, None

    def _joints_pointer(self, values, what="current"):
        if values is None:
            return self.ffi.NULL, None
        keep = np.array(vector(values, self.dof, what), dtype=self.dtype)
        return self._pointer(keep), keep

    STATUS_NAMES = ("ok", "unreachable", "invalid_input", "not_realisable")

    def _answer(self, count, with_status, buffers: "_Buffers"):
        solutions = self._reader.read(buffers.solutions, count)
        return (solutions, self.STATUS_NAMES[buffers.status[0]]) if with_status else solutions

    def inverse(self, pose, *args, **kwargs) -> list[tuple]:
        """The Python back-end's inverse(pose, [given,] current=None, limits="drop", with_status=False):
        (joints, config, singular, conditioning, within_limits) per solution."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        return self._inverse_pose(pose, given, *args, **kwargs)

    def _inverse_pose(self, pose, given, current=None, limits="drop", with_status=False) -> list[tuple]:
        b = self._buffers()
        flat, _keep_pose = self._pose_array(pose, b)
        hint, _keep = self._joints_pointer(current)
        count = self._inverse(flat, *given, hint, limits_mode(limits), b.solutions, b.status)
        return self._answer(count, with_status, b)

    def inverse_joints(self, pose, *args, **kwargs) -> list[tuple]:
        """The Python back-end's inverse_joints(pose, [given,] current=None): the readings of every
        closed-form solution, from the C readings-only entry (the full call with limits ignored for
        a solver without one)."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        current = kwargs.pop("current", args[0] if args else None)
        if self._readings is None:
            return [s[0] for s in self._inverse_pose(pose, given, current, "ignore")]
        b = self._buffers()
        flat, _keep_pose = self._pose_array(pose, b)
        hint, _keep = self._joints_pointer(current)
        count = self._readings(flat, *given, hint, self.ffi.cast(self._rows_type, self.ffi.from_buffer(b.rows)))
        return [tuple(row) for row in b.rows[:count].tolist()]

    def choose_given(self, pose, current=None, criterion="nearest", weights=None, config=None, step=None,
                     limits="drop"):
        """The C choose_given: (reading, solution) best by ``criterion``, or None."""
        check_criterion(criterion, current, self.dof)
        step = self.given_step if step is None else real(step, "step")
        flat = self._flat_pose(pose)
        here, _keep1 = self._joints_pointer(current)
        w, _keep2 = self._joints_pointer(weights, "weights")
        best = self.ffi.new(f"{self.prefix}_solution *")
        value = self.ffi.new(f"{self.scalar.name} *")
        found = getattr(self.lib, f"{self.prefix}_choose_given")(
            self._pointer(flat), here, w, self.wanted(config), CRITERIA.index(criterion), step, limits_mode(limits),
            best, value, self._buffers().status)
        return (float(value[0]), self._reader.read(best, 1)[0]) if found else None

    def _vector(self, values, what="point") -> np.ndarray:
        return np.array(vector(values, 3, what), dtype=self.dtype)

    def inverse_point(self, point, current=None, limits="drop", with_status=False):
        p = self._vector(point)
        hint, _keep = self._joints_pointer(current)
        b = self._buffers()
        count = getattr(self.lib, f"{self.prefix}_inverse_point")(self._pointer(p), hint, limits_mode(limits),
                                                                  b.solutions, b.status)
        return self._answer(count, with_status, b)

    def inverse_point_angle(self, point, angle, current=None, limits="drop", with_status=False):
        p = self._vector(point)
        hint, _keep = self._joints_pointer(current)
        b = self._buffers()
        count = getattr(self.lib, f"{self.prefix}_inverse_point_angle")(
            self._pointer(p), real(angle, "angle"), hint, limits_mode(limits), b.solutions, b.status)
        return self._answer(count, with_status, b)

    def inverse_point_direction(self, point, direction, current=None, limits="drop", with_status=False):
        p, u = self._vector(point), self._vector(direction, "direction")
        hint, _keep = self._joints_pointer(current)
        b = self._buffers()
        count = getattr(self.lib, f"{self.prefix}_inverse_point_direction")(
            self._pointer(p), self._pointer(u), hint, limits_mode(limits), b.solutions, b.status)
        return self._answer(count, with_status, b)

    def wanted(self, config) -> object:
        """The C filter for a configuration: NULL for any, else +1/-1/0 per label. ``config`` as in
        the Python solver: a dict {label name: value} or a sequence with None for 'any'."""
        if wanted_config(config, self.label_names, self.labels) is None:
            return self.ffi.NULL
        signs = [0] * len(self.labels)
        items = config.items() if isinstance(config, dict) else zip(self.label_names, config)
        for name, value in items:
            if value is None:
                continue
            index = self.label_names.index(name)
            positive, negative = self.labels[index]
            if value not in (positive, negative):
                raise ValueError(f"label {name!r} takes {positive!r} or {negative!r}, not {value!r}")
            signs[index] = 1 if value == positive else -1
        return self.ffi.new("signed char[]", signs)

    def nearest(self, pose, *args, **kwargs) -> tuple | None:
        """nearest(pose, [given,] current, weights=None, config=None, limits="drop")."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        return self._nearest(pose, given, *args, **kwargs)

    def _nearest(self, pose, given, current, weights=None, config=None, limits="drop") -> tuple | None:
        flat = self._flat_pose(pose)
        if current is None:
            raise ValueError(f"current must be a sequence of {self.dof} real numbers, not None")
        here, _keep1 = self._joints_pointer(current)
        w, _keep2 = self._joints_pointer(weights, "weights")
        best = self.ffi.new(f"{self.prefix}_solution *")
        found = getattr(self.lib, f"{self.prefix}_nearest")(self._pointer(flat), *given, here, w, self.wanted(config),
                                                            limits_mode(limits), best, self._buffers().status)
        return self._reader.read(best, 1)[0] if found else None

    def sort_nearest(self, pose, *args, **kwargs) -> list[tuple]:
        """inverse() then the C sort by distance from ``current``: sort_nearest(pose, [given,] current,
        weights=None, limits="drop")."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        return self._sort_nearest(pose, given, *args, **kwargs)

    def _sort_nearest(self, pose, given, current, weights=None, limits="drop") -> list[tuple]:
        flat = self._flat_pose(pose)
        if current is None:
            raise ValueError(f"current must be a sequence of {self.dof} real numbers, not None")
        here, _keep1 = self._joints_pointer(current)
        w, _keep2 = self._joints_pointer(weights, "weights")
        b = self._buffers()
        count = self._inverse(self._pointer(flat), *given, here, limits_mode(limits), b.solutions, b.status)
        getattr(self.lib, f"{self.prefix}_sort_nearest")(b.solutions, count, here, w)
        return self._reader.read(b.solutions, count)

    def status(self) -> int:
        """Status of this thread's last inverse() call: 0 ok, 1 unreachable, 2 invalid input, 3 not
        realisable."""
        return int(self._buffers().status[0])

    def inverse_many(self, poses, given=None, limits="drop", threads=None,
                     out=None) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(joints N x slots x dof, counts N, labels N x slots x labels (+1/-1), singular N x slots) for
        N x 4 x 4 poses (and N readings of the given joint, for an arm that has one); the slots after a
        pose's count hold zeros. slots: the most solutions a pose can have in the mode, the closed-form
        count with limits="ignore" (no multi-turn equivalents), else MAX_SOLUTIONS.

        The loop runs in C. ``threads`` (default: one per CPU for at least MANY_PER_THREAD poses a
        thread, else one) splits the poses into that many contiguous parts solved at once: cffi
        releases the GIL during a C call and the solver keeps no state, so the parts are independent
        and the result is the same for any number of threads. ``out``: the four arrays of an earlier
        call with as many poses, filled again and returned (new arrays cost the memory system a
        first touch of every page: refilled ones were 1.04-1.11x faster for 200,000 poses here)."""
        poses = np.ascontiguousarray(np.asarray(poses, dtype=self.dtype).reshape(-1, 16))
        n = poses.shape[0]
        values = None
        if self.given is not None:
            if given is None:
                raise ValueError(f"given must be {n} readings of the given joint {self.given}, not None")
            values = np.ascontiguousarray(np.broadcast_to(np.asarray(given, dtype=self.dtype), (n,)))
        mode = limits_mode(limits)
        if threads is None:
            threads = max(1, min(os.cpu_count() or 1, n // MANY_PER_THREAD))
        elif not isinstance(threads, int) or isinstance(threads, bool) or threads < 1:
            raise ValueError(f"threads must be a whole number of at least 1, not {threads!r:.40}")
        width = self.closed_form if limits == "ignore" else self.max_solutions
        joints, counts, labels, singular = self._many_arrays(n, out, width)

        def solve(start: int, stop: int) -> None:
            extra = () if values is None else (self._pointer(values[start:stop]),)
            self._many(stop - start, self._pointer(poses[start:stop]), *extra, mode, self._pointer(joints[start:stop]),
                       self.ffi.cast("int *", self.ffi.from_buffer(counts[start:stop])),
                       self.ffi.cast("signed char *", self.ffi.from_buffer(labels[start:stop])),
                       self.ffi.cast("int *", self.ffi.from_buffer(singular[start:stop])))
        bounds = [n * k // threads for k in range(threads + 1)]
        if threads == 1:
            solve(0, n)
        else:
            with ThreadPoolExecutor(max_workers=threads) as pool:
                for done in [pool.submit(solve, a, b) for a, b in zip(bounds, bounds[1:]) if b > a]:
                    done.result()
        return joints, counts, labels, singular


    def _many_arrays(self, n: int, out, width: int) -> tuple:
        """inverse_many's four output arrays, ``width`` slots a pose: new ones (the C loop writes every
        slot), or ``out`` checked to be what a call with n poses in this limits mode returns."""
        shapes = [((n, width, self.dof), self.dtype), ((n,), np.int32),
                  ((n, width, max(len(self.labels), 1)), np.int8), ((n, width), np.int32)]
        if out is None:
            return tuple(np.empty(shape, dtype=dtype) for shape, dtype in shapes)
        names = ("joints", "counts", "labels", "singular")
        if not isinstance(out, (tuple, list)) or len(out) != 4:
            raise ValueError("out must be the four arrays (joints, counts, labels, singular) an earlier "
                             f"inverse_many returned, not {type(out).__name__}")
        for name, array, (shape, dtype) in zip(names, out, shapes):
            if not (isinstance(array, np.ndarray) and array.shape == shape and array.dtype == dtype
                    and array.flags.c_contiguous and array.flags.writeable):
                got = f"{array.dtype} {array.shape}" if isinstance(array, np.ndarray) else type(array).__name__
                raise ValueError(f"out's {name} must be a writeable C-contiguous {np.dtype(dtype)} array of shape "
                                 f"{shape} (as inverse_many returns for {n} poses in this limits mode), not {got}")
        return tuple(out)


def compile_solver(arm: Arm, derivation: Derivation | None = None, scalar=c_backend.DOUBLE,
                   folder: str | Path | None = None, extra_compile_args: tuple = (),
                   extra_link_args: tuple = (), quiet: bool = True) -> CSolver:
    """Render, compile and load the C solver of ``arm``.

    The build runs in a scratch folder that is removed afterwards; ``folder`` (created when
    missing; a temporary folder when None) receives only the results, all or nothing: the C
    source and header, the extension, and the wrapper ``<prefix>_c.py`` with its constants in
    ``<prefix>_c.json`` (see ikgen/cwrapper.py). A relative ``folder`` is taken from the
    current directory."""
    try:
        import cffi
    except ImportError as exc:  # pragma: no cover - cffi is a runtime dependency
        raise IkgenError("cffi is needed to build C extensions: pip install cffi") from exc
    derivation = derivation or derive_arm(arm)
    folder = Path(folder).resolve() if folder else Path(tempfile.mkdtemp(prefix="ikgen-c-"))
    names = c_backend.names(arm, scalar)
    module_name = f"_{names['prefix']}_cffi"
    with tempfile.TemporaryDirectory(prefix="ikgen-build-") as scratch:
        library = _build(cffi, arm, derivation, scalar, Path(scratch).resolve(), module_name, extra_compile_args,
                         extra_link_args, quiet)
        files = {name: text for name, text in c_backend.render(arm, derivation, scalar).items()}
        files[library.name] = library.read_bytes()
        files.update(wrapper_files(arm, derivation, scalar, module_name))
        from .generate import write
        write(files, folder)
    installed = folder / library.name
    installed.chmod(installed.stat().st_mode | 0o111 & ~_umask())   # a shared object, like the linker makes it
    spec = importlib.util.spec_from_file_location(module_name, installed)
    module = importlib.util.module_from_spec(spec)
    sys.modules.pop(module_name, None)
    spec.loader.exec_module(module)
    return CSolver(module, arm, derivation, scalar, folder)


def _build(cffi, arm: Arm, derivation: Derivation, scalar, scratch: Path, module_name: str,
           extra_compile_args: tuple, extra_link_args: tuple, quiet: bool) -> Path:
    """Compile the solver in ``scratch`` (an absolute folder: cffi changes into it) and return
    the extension's path there."""
    files = c_backend.render(arm, derivation, scalar)
    for name, text in files.items():
        (scratch / name).write_text(text, encoding="utf-8")
    names = c_backend.names(arm, scalar)
    from .backends.common import lower, max_solutions
    plan = lower(derivation)
    context = {"names": names, "real": scalar.name, "dof": arm.dof, "max": max_solutions(arm, plan),
               "closed": plan.max_solutions,
               "GP": f"{scalar.name} given, " if arm.given_joint else "",
               "conditions": max(len(plan.condition_blocks), 1), "labels": max(len(plan.labels), 1),
               "target": derivation.target.kind if derivation.target else "pose"}
    env = environment()
    ffi = cffi.FFI()
    ffi.cdef(env.get_template("c_cffi_cdef.h.j2").render(**context))
    ffi.set_source(module_name, env.get_template("c_cffi_glue.c.j2").render(**context),
                   sources=[str(scratch / names["source"])], include_dirs=[str(scratch)],
                   extra_compile_args=["-O2", "-std=c99", *extra_compile_args],
                   extra_link_args=list(extra_link_args), libraries=["m"])
    try:
        if quiet:
            import contextlib
            import io
            with contextlib.redirect_stdout(io.StringIO()):
                library = ffi.compile(tmpdir=str(scratch), verbose=False)
        else:
            library = ffi.compile(tmpdir=str(scratch), verbose=True)
    except Exception as exc:  # the compiler's own message is the useful part
        raise IkgenError(f"compiling the C solver of '{arm.name}' failed: {exc}") from None
    return Path(library)


def wrapper_files(arm: Arm, derivation: Derivation, scalar, module_name: str) -> dict[str, str]:
    """The friendly wrapper (ikgen/cwrapper.py, copied unchanged) and its JSON constants: the
    public constants of the generated Python solver, so that both modules state the same
    names, labels and limits."""
    from .backends import python as python_backend
    from .backends.common import lower, max_solutions
    from .generate import load_module
    python_module = load_module(python_backend.render(arm, derivation), f"{module_name}_constants")
    spec = {key: value for key, value in vars(python_module).items()
            if key.isupper() and not key.startswith("_") and _plain(value)}
    prefix = c_backend.names(arm, scalar)["prefix"]
    spec.update(prefix=prefix, real=scalar.name, extension=module_name,
                MAX_SOLUTIONS=max_solutions(arm, lower(derivation)))
    source = Path(__file__).with_name("cwrapper.py").read_text(encoding="utf-8")
    return {f"{prefix}_c.py": source,
            f"{prefix}_c.json": json.dumps(spec, indent=1, ensure_ascii=True) + "\n"}


def _plain(value) -> bool:
    """True for values JSON keeps exactly: text, numbers, booleans and (nested) tuples of them."""
    if isinstance(value, (str, int, float, bool)):
        return not isinstance(value, float) or math.isfinite(value)
    return isinstance(value, (tuple, list)) and all(_plain(v) for v in value)


def _umask() -> int:
    current = os.umask(0)
    os.umask(current)
    return current
