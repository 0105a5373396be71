"""Joint logs with external-axis columns: the reader and the log diagnosis posed per row."""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.joint_log import JointLogError, parse_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.resources import data_folder
from posebridge.results.log_diagnosis import log_diagnosis_result

DEMO = data_folder("robots") / "demo-track-cell.json"
HEADER = "time_s,j1,j2,j3,j4,j5,j6"
ROBOT = "10,-20,30,0,45,0"


@pytest.fixture(scope="module")
def demo() -> Scene:
    return resolve_scene(load_cell(DEMO), DEMO)


def test_reader_takes_external_columns_and_defaults_the_rest(demo: Scene) -> None:
    text = f"{HEADER},track_mm\n0.0,{ROBOT},500\n1.0,{ROBOT},1500\n"
    log = parse_joint_log(text, demo.robot, external=demo.external)
    assert log.external_names == ("track", "table-1")
    assert log.external_given == ("track",)
    # closed form: mm to m; the table has no column and stays at the cell's value (home, 0 deg)
    np.testing.assert_allclose(log.external, [[0.5, 0.0], [1.5, 0.0]], atol=1e-15)
    bare = parse_joint_log(
        f"{HEADER},table-1\n0.0,{ROBOT},90\n", demo.robot, external=demo.external
    )
    np.testing.assert_allclose(bare.external, [[0.0, np.pi / 2]], atol=1e-15)  # closed form
    old = parse_joint_log(f"{HEADER}\n0.0,{ROBOT}\n", demo.robot, external=demo.external)
    assert old.external_given == ()
    np.testing.assert_allclose(old.external, [demo.external.values])  # the cell's values
    with pytest.raises(JointLogError, match=r"column 8: unknown column 'track_deg'.*in mm"):
        parse_joint_log(f"{HEADER},track_deg\n0.0,{ROBOT},5\n", demo.robot, external=demo.external)
    with pytest.raises(JointLogError, match=r"unknown column 'track'"):
        parse_joint_log(f"{HEADER},track\n0.0,{ROBOT},5\n", demo.robot)  # a cell without axes


def test_log_diagnosis_poses_every_row_at_its_track_value(demo: Scene) -> None:
    text = f"{HEADER},track_mm\n0.0,{ROBOT},500\n1.0,{ROBOT},1500\n1.1,{ROBOT},2500\n"
    log = parse_joint_log(text, demo.robot, external=demo.external)
    result = log_diagnosis_result(diagnose_log(demo, log))
    assert result.external_names == ["track", "table-1"]
    assert result.external_logged == ["track"]
    assert result.external_defaults == {"table-1": 0.0}
    assert result.rows is not None
    assert result.rows.external == [[500.0, 0.0], [1500.0, 0.0], [2500.0, 0.0]]
    tcp = np.array(result.rows.tcp_position_mm)
    # closed form: the joints are still and the rail runs along world x
    np.testing.assert_allclose(tcp - tcp[0], [[0, 0, 0], [1000, 0, 0], [2000, 0, 0]], atol=1e-9)
    track = next(m for m in result.smallest_margins if m.joint == "track")
    # closed form: 500 mm is the row nearest the range [0, 4000] mm, 500 mm from its lower end
    assert (track.row, track.margin, track.nearer_limit) == (0, pytest.approx(500.0), "lower")
    # closed form: 1000 mm in 0.1 s is 10000 mm/s, above the track's 1500 mm/s
    jumps = [j for j in result.velocity.jumps if j.joint == "track"]
    assert [j.row for j in jumps] == [2]
    assert jumps[0].speed == pytest.approx(10000.0)
    assert jumps[0].limit == pytest.approx(1500.0)
    assert result.worst_row.diagnosis.external_axes["track"] == pytest.approx(
        result.rows.external[result.worst_row.row][0]
    )
