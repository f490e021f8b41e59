"""Orientation sets and rotation files of the reach map (ikgen/reach/orientations.py, grid.py),
against scipy's Rotation (an outside reference: scipy.spatial.transform.Rotation.from_euler with
lower-case axes is rotations about fixed axes, applied in the written order; from_quat takes
scalar-last quaternions)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from ikgen.errors import IkgenError
from ikgen.reach.grid import Grid, axis_count, axis_values
from ikgen.reach.orientations import orientation_sets, parse_rotations


def test_down_set_points_the_tool_axis_straight_down_and_turns_it_about_the_vertical():
    rotations, names = orientation_sets("down:30")
    assert names[:3] == ("down yaw 0", "down yaw 30", "down yaw 60") and len(names) == 12
    for rotation, yaw in zip(rotations, range(0, 360, 30)):
        expected = Rotation.from_euler("xyz", [180, 0, yaw], degrees=True).as_matrix()   # Rz(yaw) Rx(180)
        np.testing.assert_allclose(rotation, expected, atol=1e-15)
        np.testing.assert_array_equal(rotation[:, 2], [0.0, 0.0, -1.0])      # exactly down


def test_level_tilt_and_fixed_sets_match_scipy():
    rotations, names = orientation_sets("level:90,tilt:20:120,fixed:10:-20:30")
    assert names == ("level heading 0", "level heading 90", "level heading 180", "level heading 270",
                     "tilt 20 heading 0", "tilt 20 heading 120", "tilt 20 heading 240", "fixed 10 -20 30")
    for k, heading in enumerate((0, 90, 180, 270)):
        np.testing.assert_allclose(rotations[k], Rotation.from_euler("yz", [90, heading], degrees=True).as_matrix(),
                                   atol=1e-15)
        np.testing.assert_allclose(rotations[k][:, 2], [np.cos(np.radians(heading)), np.sin(np.radians(heading)), 0],
                                   atol=1e-15)
    for k, heading in zip((4, 5, 6), (0, 120, 240)):
        expected = Rotation.from_euler("xyz", [180, -20, heading], degrees=True).as_matrix()
        np.testing.assert_allclose(rotations[k], expected, atol=1e-15)
        # the tool axis is 20 degrees from straight down, leaning towards the heading
        assert np.degrees(np.arccos(-rotations[k][2, 2])) == pytest.approx(20.0)
        lean = rotations[k][:2, 2]
        assert np.degrees(np.arctan2(lean[1], lean[0])) % 360 == pytest.approx(heading)
    np.testing.assert_allclose(rotations[7], Rotation.from_euler("xyz", [10, -20, 30], degrees=True).as_matrix(),
                               atol=1e-15)


@pytest.mark.parametrize("text, fragment", [
    ("down:0", "step 0 deg; expected more than 0"), ("down:400", "step 400 deg"),
    ("down:x", "'x' is not a finite number"), ("tilt:200:90", "tilt 200 deg; expected 0 to 180"),
    ("fixed:1:2", "2 number(s) after 'fixed'"), ("up:90", "unknown set 'up'"), ("down:0.1", "more than 1,000"),
])
def test_bad_orientation_sets_are_refused_with_a_message(text, fragment):
    with pytest.raises(IkgenError) as caught:
        orientation_sets(text)
    assert fragment in str(caught.value)


def test_rotation_file_reads_named_unit_quaternions():
    text = "# two ways to hold a tube\nname, qw, qx, qy, qz\nstraight down, 0, 1, 0, 0  # tool z = -z\n" \
           "tilted, 0.9659258263, 0, 0.2588190451, 0\n\n"
    rotations, names = parse_rotations(text)
    assert names == ("straight down", "tilted")
    for rotation, q in zip(rotations, [(0, 1, 0, 0), (0.9659258263, 0, 0.2588190451, 0)]):
        expected = Rotation.from_quat([q[1], q[2], q[3], q[0]]).as_matrix()          # scalar last in scipy
        np.testing.assert_allclose(rotation, expected, atol=1e-9)


@pytest.mark.parametrize("text, fragment", [
    ("", "no rotation found"), ("name, qw, qx, qy, qz\n", "no rotation found"),
    ("name, qw, qx, qy, qz\nA, 1, 0, 0\n", ":2: 4 fields; expected 5"),
    ("name, qw, qx, qy, qz\nA, 1, 0, 0, 0\nA, 1, 0, 0, 0\n", "the name 'A' is used twice"),
    ("name, qw, qx, qy, qz\nA, nan, 0, 0, 0\n", "column qw: 'nan'; expected a finite decimal number"),
    ("name, qw, qx, qy, qz\n, 1, 0, 0, 0\n", "name ''; expected 1 to 40"),
])
def test_bad_rotation_files_name_the_line(text, fragment):
    with pytest.raises(IkgenError) as caught:
        parse_rotations(text, "r.csv")
    assert fragment in str(caught.value)


def test_axes_include_the_end_that_the_step_reaches():
    np.testing.assert_array_equal(axis_values(-100, 100, 50), [-100, -50, 0, 50, 100])
    np.testing.assert_array_equal(axis_values(0, 0.3, 0.1), [0, 0.1, 0.2, 0.30000000000000004])
    assert axis_count(0, 99.9, 50) == 2 and axis_count(5, 5, 1) == 1


def test_grid_poses_follow_the_flat_index_order():
    rotations, names = orientation_sets("down:180")
    grid = Grid(np.array([1.0, 2.0]), np.array([10.0, 20.0, 30.0]), np.array([-5.0]), rotations, names)
    poses = grid.poses(0, grid.size)
    assert grid.shape == (2, 2, 3, 1) and poses.shape == (12, 4, 4)
    index = np.ravel_multi_index((1, 0, 2, 0), grid.shape)
    np.testing.assert_array_equal(poses[index][:3, 3], [1.0, 30.0, -5.0])
    np.testing.assert_array_equal(poses[index][:3, :3], rotations[1])
    np.testing.assert_array_equal(poses[:, 3], np.tile([0, 0, 0, 1.0], (12, 1)))
    np.testing.assert_array_equal(grid.poses(5, 9), poses[5:9])
