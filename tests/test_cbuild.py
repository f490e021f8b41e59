"""``ikgen compile ARM -o DIR`` and the wrapper it leaves in DIR (ikgen/cbuild.py, ikgen/cwrapper.py).

Reference: the generated pure-Python solver of the same arm (rendered here from the same arm
file), whose API (docs/solvers.md) the wrapper promises to mirror; and the arm's forward
kinematics through that module. The wrapper is imported in a separate process with exactly
the line that the command prints, from another working folder, to show that the line works as
printed and that neither ikgen nor numpy is needed at run time.
"""

from __future__ import annotations

import importlib.machinery
import json
import re
import subprocess
import sys
import textwrap

import pytest

from helpers import EXAMPLES, demo_arm
from ikgen.backends import python as python_backend
from ikgen.cli import main
from ikgen.engine import derive as derive_arm

if not any(__import__("shutil").which(cc) for cc in ("cc", "gcc", "clang")):
    pytest.skip("no C compiler on this machine", allow_module_level=True)

SUFFIX = importlib.machinery.EXTENSION_SUFFIXES[0]

CHECK = textwrap.dedent('''
    import json, random, sys
    {line}
    assert "ikgen" not in sys.modules and "numpy" not in sys.modules, "the wrapper needs ikgen or numpy"
    sys.path.insert(0, {python_folder!r})
    import reference_ik as py
    rng = random.Random(5)
    worst_forward = worst_joint = 0.0
    poses = 0
    for _ in range(300):
        q = [rng.uniform(lo, hi) for lo, hi in py.JOINT_LIMITS]
        pose = py.forward(q)
        worst_forward = max(worst_forward, max(abs(a - b) for ra, rb in zip(ik.forward(q), pose)
                                               for a, b in zip(ra, rb)))
        got, want = ik.inverse(pose), py.inverse(pose)
        assert len(got) == len(want), (len(got), len(want))
        for s, t in zip(got, want):
            assert s.config == t.config and s.singular == t.singular and s.within_limits == t.within_limits
            worst_joint = max(worst_joint, max(abs(a - b) for a, b in zip(s.joints, t.joints)))
        current = [v + 1.0 for v in q]
        near_c, near_p = ik.nearest(pose, current, config={{"elbow": "elbow_up"}}), py.nearest(pose, current,
                                                                                      config={{"elbow": "elbow_up"}})
        assert (near_c is None) == (near_p is None)
        assert near_c is None or near_c.config == near_p.config
        assert ik.inverse(pose, limits="flag") is not None and ik.inverse(pose, limits="ignore") is not None
        # the readings-only C entry: the full call's readings bit for bit, the Python solver's to rounding
        lean, lean_py = ik.inverse_joints(pose), py.inverse_joints(pose)
        assert lean == [s.joints for s in ik.inverse(pose, limits="ignore")]
        assert len(lean) == len(lean_py) and all(abs(a - b) <= 1e-9 for s, t in zip(lean, lean_py)
                                                 for a, b in zip(s, t))
        poses += 1
    same = all(getattr(ik, k) == getattr(py, k) for k in
               ("JOINT_NAMES", "LABEL_NAMES", "LABEL_VALUES", "CONDITION_NAMES", "JOINT_LIMITS", "MAX_SOLUTIONS",
                "ARM_NAME", "LENGTH_UNIT", "ANGLE_UNIT"))
    nan_pose = [[float("nan")] * 4 for _ in range(4)]
    print(json.dumps({{"poses": poses, "forward": worst_forward, "joint": worst_joint, "same_constants": same,
                      "nan_pose": len(ik.inverse(nan_pose)) + len(ik.inverse_joints(nan_pose))}}))
''')


def compile_here(tmp_path, capsys, monkeypatch, stem: str, *extra: str) -> tuple[str, str]:
    """Run ``ikgen compile`` with a relative -o from ``tmp_path``; (stdout, printed import line)."""
    monkeypatch.chdir(tmp_path)
    code = main(["compile", str(EXAMPLES / f"{stem}.toml"), "-o", "cext", *extra])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    [line] = [l.strip() for l in captured.out.splitlines() if l.strip().startswith("import sys;")]
    return captured.out, line


def run_check(tmp_path, stem: str, line: str) -> dict:
    (tmp_path / "reference").mkdir()
    arm = demo_arm(stem)
    (tmp_path / "reference" / "reference_ik.py").write_text(python_backend.render(arm, derive_arm(arm)),
                                                            encoding="utf-8")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    script = CHECK.format(line=line, python_folder=str(tmp_path / "reference"))
    result = subprocess.run([sys.executable, "-c", script], cwd=elsewhere, capture_output=True, text=True,
                            timeout=300)
    assert result.returncode == 0, result.stderr[-3000:]
    return json.loads(result.stdout.strip().splitlines()[-1])


def test_relative_folder_gives_only_the_results_and_a_working_one_line_import(tmp_path, capsys, monkeypatch):
    out, line = compile_here(tmp_path, capsys, monkeypatch, "packer6")
    folder = tmp_path / "cext"
    names = sorted(p.name for p in folder.iterdir())
    assert names == sorted(["packer6_ik.c", "packer6_ik.h", f"_packer6_ik_cffi{SUFFIX}", "packer6_ik_c.py",
                            "packer6_ik_c.json"])                       # no tmp/, no objects, no glue
    assert line == f"import sys; sys.path.insert(0, {str(folder)!r}); import packer6_ik_c as ik"
    assert "from _packer6_ik_cffi import lib" not in out
    figures = run_check(tmp_path, "packer6", line)
    assert figures["poses"] == 300 and figures["same_constants"] and figures["nan_pose"] == 0
    # DEVELOPERS.md: the Python and C back-ends agree in double; 1e-9 leaves room for libm differences.
    assert figures["forward"] <= 1e-12 and figures["joint"] <= 1e-9


def test_float_build_wrapper(tmp_path, capsys, monkeypatch):
    _, line = compile_here(tmp_path, capsys, monkeypatch, "benchtop6", "--float")
    assert line.endswith("import benchtop6_ik_f32_c as ik")
    spec = json.loads((tmp_path / "cext" / "benchtop6_ik_f32_c.json").read_text(encoding="utf-8"))
    assert spec["real"] == "float" and spec["extension"] == "_benchtop6_ik_f32_cffi"


def test_the_wrapper_file_is_ikgen_cwrapper_unchanged(tmp_path, capsys, monkeypatch):
    compile_here(tmp_path, capsys, monkeypatch, "benchtop6")
    import ikgen.cwrapper
    copied = (tmp_path / "cext" / "benchtop6_ik_c.py").read_text(encoding="utf-8")
    assert copied == open(ikgen.cwrapper.__file__, encoding="utf-8").read()
    assert not hasattr(ikgen.cwrapper, "inverse")          # ikgen's own copy binds nothing


def test_compile_into_a_file_is_refused(tmp_path, capsys, monkeypatch):
    (tmp_path / "taken").write_text("x")
    monkeypatch.chdir(tmp_path)
    code = main(["compile", str(EXAMPLES / "benchtop6.toml"), "-o", "taken"])
    captured = capsys.readouterr()
    assert code == 2 and re.match(r"ikgen: error: cannot write ", captured.err), captured.err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["taken"]


DEMOS = sorted(p for p in EXAMPLES.iterdir() if p.suffix in (".toml", ".json"))


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_readings_only_entry_returns_the_full_calls_readings(path):
    """CSolver.inverse_joints (the C <prefix>_inverse_joints, rendered from the same closed form
    without labels, conditioning, flags or limits) against the same solver's inverse with limits
    ignored: the same readings, bit for bit, in the same order. Poses from the arm's forward
    kinematics (ikgen.kinematics, checked against Craig, Introduction to Robotics, 3rd ed., sec. 3.4
    in tests/test_kinematics.py), a tenth moved out of reach."""
    import numpy as np
    import shared
    from ikgen.kinematics import NumericChain
    from ikgen.verify import given_of, random_readings
    arm = shared.arm_at(path)
    solver = shared.c_solver(arm)
    target = shared.derivation(arm).target
    kind = target.kind if target is not None else "pose"
    assert (solver._readings is not None) == (kind in ("pose", "point"))
    readings = random_readings(arm, 300, np.random.default_rng(37))
    poses = NumericChain(arm).poses(readings)
    poses[::10, :3, 3] += 10.0 * arm.reach_scale()
    found = 0
    for source, pose in zip(readings, poses):
        given = given_of(arm, source)
        full = [tuple(s[0]) for s in solver.inverse(pose.tolist(), *given, limits="ignore")]
        assert solver.inverse_joints(pose.tolist(), *given) == full
        assert solver.inverse_joints(pose, *given, current=[0.0] * arm.dof) == \
            [tuple(s[0]) for s in solver.inverse(pose, *given, [0.0] * arm.dof, "ignore")]
        found += bool(full)
    assert found >= 0.98 * 270          # the 270 poses in reach: solved (no vacuous comparison of empty lists)
    for bad in (np.full((4, 4), np.nan), np.where(np.eye(4) > 0, 1e200, 0.0)):
        assert solver.inverse_joints(bad.tolist(), *given_of(arm, readings[0])) == []
