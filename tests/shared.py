"""Session-wide caches of the expensive steps many test files repeat: deriving an arm, building its
files, compiling its C solver.

Each of these is deterministic (same arm, same derivation, same bytes: DEVELOPERS.md,
"Determinism"), so a test that only *uses* the result may take it from here instead of doing the
work again; each arm is then derived once per test process (once per pytest-xdist worker), its
C solver compiled once per scalar type. The key is ``repr(arm)``: the frozen dataclass's full repr,
every DH value exact, limits, base, tool, target, given joint, source path and digest (a
derivation's key leaves the path and digest out).

``remember_derivations()`` (called by tests/conftest.py before any test module is imported) puts
the same memo behind ``ikgen.engine.derive`` where ikgen itself calls it (generate.build,
cbuild.compile_solver, the commands run in-process, given_choices), so an in-process ``ikgen
generate``/``verify``/``explain`` of a demo arm does not derive it again. Only successful
derivations are kept; a refusal is raised afresh each time. ``real_derive`` is the engine's own
function, for the tests of determinism (``fresh_build``: derived and rendered from scratch).

The test processes of one session (pytest-xdist's workers) share derivations and builds through
pickle files in the folder named by IKGEN_TESTS_SHARE (tests/conftest.py makes it in the main
process and removes it at the end): the first process to need an arm derives it and writes the
file; another reads it instead of deriving again (if both need it at the same moment, both
derive: nobody waits). Files are read with sympy's automatic evaluation off, so that every
expression comes back exactly as it was stored: read with evaluation on, some products came back
re-evaluated (``-(a + b)`` as ``-a - b``), which changed the report's printed text. With
evaluation off, all the files of eight demo arms built from a read-back derivation were byte for
byte those built from the original.

The results are shared objects: a test must not change them (no test does; a derivation, a built
file set, a loaded solver are read-only to the tests).
"""

from __future__ import annotations

import atexit
import dataclasses
import hashlib
import os
import pickle
import shutil
import tempfile
from pathlib import Path
from unittest import mock

from sympy.core.parameters import evaluate

import ikgen.cbuild
import ikgen.engine
import ikgen.generate
from ikgen.armfile import load_arm
from ikgen.backends import batch as batch_backend, c as c_backend, python as python_backend
from ikgen.cbuild import compile_solver
from ikgen.generate import build

_DERIVATIONS: dict[str, object] = {}
_BUILDS: dict[str, object] = {}
_PYTHON_SOURCES: dict[str, str] = {}
_BATCH_SOURCES: dict[str, str] = {}
_C_SOLVERS: dict[tuple, object] = {}
_ARMS: dict[Path, object] = {}
_SCRATCH: list[Path] = []

real_derive = ikgen.engine.derive
SHARE_ENV = "IKGEN_TESTS_SHARE"     # the folder this session's test processes share (tests/conftest.py)


def _share_file(kind: str, k: str) -> Path | None:
    folder = os.environ.get(SHARE_ENV)
    if not folder or not Path(folder).is_dir():
        return None
    return Path(folder) / f"{kind}-{hashlib.sha256(k.encode()).hexdigest()[:32]}.pickle"


def _shared(kind: str, k: str, make):
    """make(), or what another test process of this session stored for the same key."""
    path = _share_file(kind, k)
    if path is None:
        return make()
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        data = None
    if data is not None:
        with evaluate(False):           # every sympy expression rebuilt as stored (see above)
            return pickle.loads(data)
    try:                                # the first process to claim the key writes it
        os.close(os.open(f"{path}.lock", os.O_CREAT | os.O_EXCL | os.O_WRONLY))
        claimed = True
    except FileExistsError:
        claimed = False
    value = make()
    if claimed:
        part = path.with_name(f"{path.name}.{os.getpid()}.part")
        part.write_bytes(pickle.dumps(value))
        os.replace(part, path)          # whole or absent: a reader never sees half a file
    return value


def key(arm) -> str:
    return repr(arm)


def arm_at(path):
    """load_arm(path), once per resolved path."""
    path = Path(path).resolve()
    if path not in _ARMS:
        _ARMS[path] = load_arm(path)
    return _ARMS[path]


def derivation(arm):
    """engine.derive(arm), once per arm. The key leaves out where the arm was read from (its path
    and digest): the engine never reads them, and many tests write a demo's text to a file of
    their own."""
    k = key(dataclasses.replace(arm, source="", digest=""))
    if k not in _DERIVATIONS:
        _DERIVATIONS[k] = _shared("derivation", k, lambda: real_derive(arm))
    return _DERIVATIONS[k]


def remember_derivations() -> None:
    """Route ikgen's own calls of engine.derive through ``derivation`` for the whole session."""
    ikgen.engine.derive = derivation
    ikgen.generate.derive_arm = derivation
    ikgen.cbuild.derive_arm = derivation


def built(arm):
    """generate.build(arm), once per arm (its derivation from ``derivation``)."""
    k = key(arm)
    if k not in _BUILDS:
        def make():
            with mock.patch.object(ikgen.generate, "derive_arm", derivation):
                return build(arm)
        _BUILDS[k] = _shared("build", k, make)
        _DERIVATIONS.setdefault(key(dataclasses.replace(arm, source="", digest="")), _BUILDS[k].derivation)
    return _BUILDS[k]


def fresh_build(arm):
    """generate.build(arm) from scratch: derived by the engine itself, not taken from the memo."""
    with mock.patch.object(ikgen.generate, "derive_arm", real_derive):
        return build(arm)


def python_source(arm) -> str:
    """The generated Python solver's text: the build's when the arm was built, else
    python_backend.render(arm, derivation(arm)), the very call generate.build makes for that file
    (without rendering the C, batch and report files a test does not read)."""
    k = key(arm)
    if k in _BUILDS:
        made = _BUILDS[k]
        return made.files[made.python_path]
    if k not in _PYTHON_SOURCES:
        _PYTHON_SOURCES[k] = python_backend.render(arm, derivation(arm))
    return _PYTHON_SOURCES[k]


def batch_source(arm) -> str:
    """The generated numpy batch solver's text: the build's when the arm was built, else
    batch_backend.render(arm, derivation(arm)), the call generate.build makes for that file."""
    k = key(arm)
    if k in _BUILDS:
        made = _BUILDS[k]
        return made.files[f"{made.folder}/{made.folder}_ik_batch.py"]
    if k not in _BATCH_SOURCES:
        _BATCH_SOURCES[k] = batch_backend.render(arm, derivation(arm))
    return _BATCH_SOURCES[k]


def c_solver(arm, scalar=c_backend.DOUBLE):
    """cbuild.compile_solver(arm, derivation(arm), scalar), compiled once per arm and scalar type into
    a folder of this process's scratch directory (removed at exit)."""
    k = (key(arm), scalar.name)
    if k not in _C_SOLVERS:
        folder = scratch() / f"c{len(_C_SOLVERS)}-{scalar.name}"
        _C_SOLVERS[k] = compile_solver(arm, derivation(arm), scalar, folder)
    return _C_SOLVERS[k]


def scratch() -> Path:
    """This process's scratch directory for shared builds (one per pytest-xdist worker)."""
    if not _SCRATCH:
        _SCRATCH.append(Path(tempfile.mkdtemp(prefix="ikgen-tests-shared-")))
        atexit.register(shutil.rmtree, _SCRATCH[0], True)
    return _SCRATCH[0]
