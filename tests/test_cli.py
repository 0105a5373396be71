"""The command line contract: commands, JSON fields, exit codes and one-line errors.

Commands run in-process through ``posebridge.cli.main``; values are checked
against closed forms, pinocchio and the cell file read directly.
"""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import jsonschema
import numpy as np
import pinocchio as pin
import pytest

from posebridge.cli import main
from posebridge.resources import data_folder

ROBOTS = data_folder("robots")
DEMO_CELL = str(ROBOTS / "demo-cell.json")
TRACK_CELL = str(ROBOTS / "demo-track-cell.json")
DEMO_LOG = str(ROBOTS / "demo-log.csv")


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    """Run the CLI; stderr without the kernel-loading lines.

    Those lines appear only when compiling kernels outlasts the announce delay, which depends on
    the machine's load; tests/test_cli_progress.py checks them.
    """
    code = main(list(argv))
    captured = capsys.readouterr()
    err = "".join(
        line
        for line in captured.err.splitlines(keepends=True)
        if not line.startswith("posebridge: kernels")
    )
    return code, captured.out, err


def run_json(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, object]:
    code, out, err = run(capsys, *argv, "--json")
    assert err == ""
    return code, json.loads(out)


def test_help_carries_the_safety_caution(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exit_info:
        main(["--help"])
    out = capsys.readouterr().out
    assert exit_info.value.code == 0
    for phrase in ("not a safety function", "ISO 10218-2", "ISO 13855", "reduced speed"):
        assert phrase in " ".join(out.split())


def test_robots_lists_the_bundled_library(capsys: pytest.CaptureFixture[str]) -> None:
    code, robots = run_json(capsys, "robots")
    assert code == 0
    by_name = {r["name"]: r for r in robots}
    assert set(by_name) >= {
        "pb-planar2r",
        "pb-planar3r",
        "pb-arm6",
        "pb-arm6-offset",
        "pb-scara4",
        "pb-gantry3",
        "pb-arm7",
    }
    # closed form: a planar 2R arm reaches l1 + l2 = 400 + 300 mm (pb-planar2r.toml)
    assert by_name["pb-planar2r"]["reach_mm"] == pytest.approx(700.0, abs=0.1)
    assert by_name["pb-arm7"]["joints"] == 7  # pb-arm7.toml has seven [[joint]] tables


def test_fk_planar2r_matches_the_closed_form(capsys: pytest.CaptureFixture[str]) -> None:
    code, result = run_json(capsys, "fk", "pb-planar2r", "--joints", "30,60")
    assert code == 0
    t1, t2 = math.radians(30), math.radians(60)
    # closed form of the planar 2R arm, l1 = 400 mm, l2 = 300 mm (pb-planar2r.toml)
    x = 400 * math.cos(t1) + 300 * math.cos(t1 + t2)
    y = 400 * math.sin(t1) + 300 * math.sin(t1 + t2)
    assert result["position_mm"] == pytest.approx([x, y, 0.0], abs=1e-9)
    assert result["rpy_deg"] == pytest.approx([0.0, 0.0, 90.0], abs=1e-9)
    # Yoshikawa 1985, planar 2R: w = l1 l2 |sin t2| (in m^2)
    assert result["manipulability"] == pytest.approx(0.4 * 0.3 * math.sin(t2), rel=1e-9)
    # margins to the limits of pb-planar2r.toml: j1 -180..180, j2 -150..150
    assert result["limit_margins_deg"] == pytest.approx([150.0, 90.0])
    assert result["quaternion_wxyz"] == pytest.approx(
        [math.cos(math.pi / 4), 0, 0, math.sin(math.pi / 4)]
    )


def test_fk_joints_file_gives_one_entry_per_row(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    csv_file = tmp_path / "joints.csv"
    csv_file.write_text("j2,j1\n0,0\n90,0\n0,-90\n", encoding="utf-8")
    code, rows = run_json(capsys, "fk", "pb-planar2r", "--joints-file", str(csv_file))
    assert code == 0
    # header order j2, j1 is mapped by name; closed form positions of the 2R arm
    expected = [[700.0, 0.0], [400.0, 300.0], [0.0, -700.0]]
    assert [r["position_mm"][:2] for r in rows] == [pytest.approx(e, abs=1e-9) for e in expected]


def test_ik_arm6_solutions_reach_the_pose_per_pinocchio(capsys: pytest.CaptureFixture[str]) -> None:
    pose = [1000.0, 200.0, 700.0, 180.0, 10.0, 30.0]
    code, result = run_json(capsys, "ik", "pb-arm6", "--pose", ",".join(map(str, pose)))
    assert code == 0
    assert result["solutions"]
    assert result["reason"] == ""
    model = pin.buildModelFromXML((ROBOTS / "pb-arm6.urdf").read_text(encoding="utf-8"))
    data = model.createData()
    tool_z_m = 0.120  # default tool of pb-arm6.toml: 120 mm along the flange z axis
    for solution in result["solutions"]:
        assert set(solution) >= {
            "joints_deg",
            "branch",
            "within_limits",
            "min_margin_deg",
            "manipulability",
        }
        pin.framesForwardKinematics(model, data, np.radians(solution["joints_deg"]))
        flange = data.oMf[model.getFrameId("flange")]
        tcp_mm = 1000 * (flange.translation + tool_z_m * flange.rotation[:, 2])
        # pinocchio FK of the URDF: the TCP sits at the requested position
        assert tcp_mm == pytest.approx(pose[:3], abs=1e-6)


def test_ik_unreachable_pose_exits_1_with_a_reason(capsys: pytest.CaptureFixture[str]) -> None:
    code, result = run_json(capsys, "ik", "pb-planar2r", "--pose", "900,0,0,0,0,0")
    # closed form: 900 mm > l1 + l2 = 700 mm
    assert code == 1
    assert result["solutions"] == []
    assert "out of reach" in result["reason"]


def test_ik_planar2r_gives_both_elbow_branches(capsys: pytest.CaptureFixture[str]) -> None:
    code, result = run_json(capsys, "ik", "pb-planar2r", "--pose", "500,200,0,0,0,0")
    assert code == 0
    # law of cosines: cos t2 = (r^2 - l1^2 - l2^2) / (2 l1 l2), both signs of t2
    r2 = 500.0**2 + 200.0**2
    t2 = math.degrees(math.acos((r2 - 400.0**2 - 300.0**2) / (2 * 400.0 * 300.0)))
    assert sorted(s["joints_deg"][1] for s in result["solutions"]) == pytest.approx([-t2, t2])
    assert set(result["ignored_components"]) >= {"z", "roll", "pitch"}


ALL_REVOLUTIONS_POSE = "900,0,800,180,0,0"


def test_ik_text_names_the_joints_of_the_solution_rows(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run(capsys, "ik", "pb-planar2r", "--pose", "500,200,0,0,0,0")
    assert code == 0, err
    lines = out.splitlines()
    header = next(i for i, line in enumerate(lines) if "joints" in line)
    # our own contract: a header names each column (joint names and units from
    # pb-planar2r.toml), then one row per solution
    assert lines[header].strip() == "[branch] joints j1 (deg), j2 (deg)"
    assert len(lines) - header - 1 == 2  # two elbow branches of a 2R arm (closed form)


def test_ik_all_revolutions_lists_every_in_limit_revolution(
    capsys: pytest.CaptureFixture[str],
) -> None:
    code, nearest = run_json(capsys, "ik", "pb-arm6", "--pose", ALL_REVOLUTIONS_POSE)
    assert code == 0
    code, every = run_json(
        capsys, "ik", "pb-arm6", "--pose", ALL_REVOLUTIONS_POSE, "--all-revolutions"
    )
    assert code == 0
    assert len(every["solutions"]) > len(nearest["solutions"])

    def same_modulo_360(a: dict, b: dict) -> bool:
        d = (np.array(a["joints_deg"]) - np.array(b["joints_deg"]) + 180.0) % 360.0 - 180.0
        return bool(np.abs(d).max() < 1e-6)

    # the same configurations modulo 360 deg, now with every revolution variant listed
    assert all(any(same_modulo_360(s, n) for n in nearest["solutions"]) for s in every["solutions"])
    assert all(any(same_modulo_360(n, s) for s in every["solutions"]) for n in nearest["solutions"])
    for solution in every["solutions"]:
        joints = np.array(solution["joints_deg"])
        # documented rule (kinematics/branches.py centred_revolution): revolutions count from
        # the revolution centred on the range, a half (within 1e-9 revolution) rounded toward
        # zero; j4 and j6 of pb-arm6.toml have ranges symmetric about 0 deg, wider than 360 deg
        for j in (3, 5):
            x = joints[j] / 360.0
            expected = math.copysign(math.floor(abs(x) + 0.5 - 1e-9), x)
            assert solution["revolutions"][j] == int(expected)
        for name, count in zip(every["joint_names"], solution["revolutions"], strict=True):
            # our own contract: the label names every extra revolution as "j6 +1 rev"
            assert (f"{name} {count:+d} rev" in solution["branch"]) == (count != 0)


def test_ik_old_all_turns_option_still_works_and_says_it_is_deprecated(
    capsys: pytest.CaptureFixture[str],
) -> None:
    argv = ["ik", "pb-arm6", "--pose", ALL_REVOLUTIONS_POSE, "--json"]
    new_code, new_out, new_err = run(capsys, *argv, "--all-revolutions")
    old_code, old_out, old_err = run(capsys, *argv, "--all-turns")
    # our own contract: the old name works for one release and says what replaces it
    assert (old_code, old_out) == (new_code, new_out)
    assert new_err == ""
    assert old_err.count("\n") == 1
    assert "--all-turns is deprecated" in old_err
    assert "use --all-revolutions" in old_err


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["fk", "pb-arm6", "--joints", "1,2,3"], "expected 6 comma-separated values, got 3"),
        (["fk", "pb-arm6", "--joints", "1,2,3,4,5,nan"], "value 6 'nan' is not a finite number"),
        (["fk", "pb-arm6", "--joints", "1,2,x,4,5,6"], "value 3 'x' is not a number"),
        (["fk", "no-such-robot", "--joints", "0"], "unknown robot 'no-such-robot'"),
        (["ik", "pb-arm6", "--pose", "1,2,3"], "expected 6 comma-separated values, got 3"),
        (["check", "/nonexistent/cell.json"], "/nonexistent/cell.json"),
        (["diagnose", DEMO_CELL, "--joints", "0,0"], "expected 6 comma-separated values, got 2"),
        (["place", DEMO_CELL, "--grid", "z_mm=1"], "--grid: expected items KEY=START:STOP:COUNT"),
        (["place", TRACK_CELL, "--grid", "x_mm=0"], "a rail search takes offset_mm and yaw_deg"),
        (["place", DEMO_CELL, "--grid", "offset_mm=0"], "offset_mm is for a rail search"),
        (["place", DEMO_CELL, "--search", "table"], "table placement: the cell has no turntable"),
        (["place", DEMO_CELL, "--table", "table-1"], "--table: only for a table search"),
        (
            ["place", TRACK_CELL, "--search", "table", "--grid", "yaw_deg=0"],
            "a table search takes x_mm and y_mm only",
        ),
        (
            ["place", TRACK_CELL, "--search", "table", "--table", "nope"],
            "no turntable called 'nope'",
        ),
        (["serve", "--host", "0.0.0.0"], "not a loopback address"),
    ],
)
def test_bad_input_prints_one_line_and_exits_2(
    capsys: pytest.CaptureFixture[str], argv: list[str], message: str
) -> None:
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert out == ""
    assert err.count("\n") == 1  # our own contract: one line, no traceback
    assert message in err
    assert "Traceback" not in err


def test_broken_robot_file_exits_2(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    broken = tmp_path / "broken.toml"
    broken.write_text("[robot\nname = 1\n", encoding="utf-8")
    code, _, err = run(capsys, "fk", str(broken), "--joints", "0")
    assert code == 2
    assert err.startswith("posebridge fk: ")
    assert str(broken) in err
    assert err.count("\n") == 1


def test_check_demo_exits_1_and_names_the_branch_breaking_target(
    capsys: pytest.CaptureFixture[str],
) -> None:
    code, report = run_json(capsys, "check", DEMO_CELL)
    assert code == 1  # the demo carries warnings by design (cell notes)
    raw = json.loads(Path(DEMO_CELL).read_text(encoding="utf-8"))
    assert [t["name"] for t in report["targets"]] == [t["name"] for t in raw["targets"]]
    assert report["consistent_branch"]["breaking_targets"] == ["reject-drop"]


def test_diagnose_log_finds_the_velocity_jump(capsys: pytest.CaptureFixture[str]) -> None:
    code, result = run_json(capsys, "diagnose", DEMO_CELL, "--log", DEMO_LOG)
    assert code == 1
    rows = np.loadtxt(DEMO_LOG, delimiter=",", skiprows=1)
    speed = np.abs(np.diff(rows[:, 4])) / np.diff(rows[:, 0])
    with (ROBOTS / "pb-arm6.toml").open("rb") as handle:
        j4_limit = tomllib.load(handle)["joint"][3]["limits"]["velocity_deg_s"]
    # closed form from the CSV: j4 speed between consecutive rows vs its limit (pb-arm6.toml)
    (jump_rows,) = np.nonzero(speed > j4_limit * 1.01)
    assert result["velocity"]["checked"]
    assert [j["row"] for j in result["velocity"]["jumps"]] == [int(r) + 1 for r in jump_rows]


def test_diagnose_log_with_bare_cr_lines(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # exit 3 (internal error) before: the csv module saw one line with CRs inside
    log = tmp_path / "cr.csv"
    log.write_bytes(Path(DEMO_LOG).read_bytes().replace(b"\r\n", b"\n").replace(b"\n", b"\r"))
    code, result = run_json(capsys, "diagnose", DEMO_CELL, "--log", str(log))
    code_lf, result_lf = run_json(capsys, "diagnose", DEMO_CELL, "--log", DEMO_LOG)
    assert (code, result["row_count"]) == (code_lf, result_lf["row_count"])


def test_bad_input_line_escapes_control_characters(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    missing = tmp_path / "run\x1b[2J.csv"  # a terminal would clear the screen on this name
    code, _, err = run(capsys, "diagnose", DEMO_CELL, "--log", str(missing))
    assert code == 2
    assert "\x1b" not in err
    assert "run\\x1b[2J.csv: cannot read" in err


def test_paths_report_the_demo_collision(capsys: pytest.CaptureFixture[str]) -> None:
    code, reports = run_json(capsys, "paths", DEMO_CELL, "unload-to-conveyor")
    assert code == 1
    (report,) = reports
    assert not report["ok"]
    assert any(f["kind"] == "collision" for f in report["findings"])
    # findings with a cause are grouped by (severity, kind, cause): the counts add up to the
    # findings that have one (our own contract)
    with_cause = [f for f in report["findings"] if f["cause"] is not None]
    assert sum(g["count"] for g in report["finding_groups"]) == len(with_cause)
    # the total is the sum of the segment times (our own contract)
    assert report["cycle_time_s"] == pytest.approx(sum(s["duration_s"] for s in report["segments"]))


def test_paths_optimise_the_demo_sequences(capsys: pytest.CaptureFixture[str]) -> None:
    code, reports = run_json(capsys, "paths", DEMO_CELL, "--optimise", "--limit-margin-deg", "2")
    assert code == 0
    raw = json.loads(Path(DEMO_CELL).read_text())
    assert [r["path"] for r in reports] == [p["name"] for p in raw["paths"]]
    for report in reports:
        assert report["feasible"]
        assert report["best"]["violations"] == []
        assert report["limit_margin_deg"] == 2.0
        best, current = report["best"]["cycle_time_s"], report["current"]["cycle_time_s"]
        if not report["current"]["violations"]:
            # the current choice is one of the sequences searched: never faster (closed form)
            assert best <= current + 1e-9
    code, out, _ = run(capsys, "paths", DEMO_CELL, "unload-to-conveyor", "--optimise")
    assert code == 0
    assert "slower but valid" in out
    assert "in collision" in out


def test_export_writes_csv_and_json(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    target = tmp_path / "motion.csv"
    code, out, err = run(capsys, "export", DEMO_CELL, "load-press", "-o", str(target))
    assert code == 0
    assert err == ""
    assert str(target) in out
    lines = target.read_text().splitlines()
    assert lines[0] == "# posebridge motion export"
    table = [line for line in lines if not line.startswith("#")]
    # the cell's robot joints with their unit in the header (the bundled pb-arm6 has six)
    assert table[0].split(",")[2:8] == [f"j{k}_deg" for k in range(1, 7)]
    # closed form: rows every 10 ms from 0 up to the end, plus the end itself
    data = tmp_path / "motion.json"
    code, _, _ = run(
        capsys, "export", DEMO_CELL, "load-press", "-o", str(data), "--period-ms", "10"
    )
    body = json.loads(data.read_text())
    assert code == 0
    assert body["header"]["period_ms"] == 10.0
    times = [row[0] for row in body["rows"]]
    assert times[:3] == pytest.approx([0.0, 0.01, 0.02])
    assert times[-1] == pytest.approx(body["header"]["cycle_time_s"])
    code, _, err = run(capsys, "export", DEMO_CELL, "load-press", "-o", str(tmp_path / "m.txt"))
    assert code == 2
    assert "expected a .csv or .json file" in err
    code, _, err = run(capsys, "export", DEMO_CELL, "nowhere", "-o", str(target))
    assert code == 2
    assert "unknown path 'nowhere'" in err


def test_place_small_grid(capsys: pytest.CaptureFixture[str]) -> None:
    code, report = run_json(
        capsys,
        "place",
        DEMO_CELL,
        "--grid",
        "x_mm=-200:200:3 y_mm=0 yaw_deg=0",
        "--workers",
        "1",
        "--top",
        "2",
    )
    assert code == 0
    assert len(report["best"]) == 2
    assert report["grid"]["x_mm"] == pytest.approx([-200.0, 0.0, 200.0])
    assert report["best"][0]["score"] >= report["best"][1]["score"]


def test_jointmap_over_the_track(capsys: pytest.CaptureFixture[str]) -> None:
    cell = str(ROBOTS / "demo-track-cell.json")
    hold = "0,10,-20,0,40,0,1000,45"
    argv = ("jointmap", cell, "--joints", "track,j1", "--hold", hold, "--resolution", "8")
    code, result = run_json(capsys, *argv, "--workers", "1")
    assert code == 0
    assert result["joint_names"] == ["track", "j1"]
    assert result["joint_units"] == ["mm", "deg"]
    # the track's range 0..4000 mm (robots/demo-track-cell.json), j1 -167..167 deg (pb-arm6.toml)
    assert result["lower_deg"] == pytest.approx([0.0, -167.0])
    assert result["upper_deg"][0] == pytest.approx(4000.0)
    assert result["external_hold_deg"] == pytest.approx([1000.0, 45.0])  # as held
    assert main([*argv, "--quiet"]) == 0
    assert "external axes: table-1 45.00 deg" in capsys.readouterr().out
    assert main(["jointmap", cell, "--joints", "track,table-1", "--quiet"]) == 2
    assert "at most one external axis" in capsys.readouterr().err


def test_place_searches_the_rail_of_a_track_cell(capsys: pytest.CaptureFixture[str]) -> None:
    code, report = run_json(
        capsys, "place", TRACK_CELL, "--grid", "offset_mm=0 yaw_deg=0", "--workers", "1"
    )
    assert code == 0
    assert report["search"] == "rail"  # automatic for a cell with a track
    assert report["grid"]["x_mm"] == [0.0]
    # source: demo-track-cell.json's track, travel 0..4000 mm along +x
    assert report["best"][0]["rail"]["travel_configured_mm"] == [0.0, 4000.0]
    assert report["best"][0]["rail"]["direction"] == pytest.approx([1.0, 0.0, 0.0])


def test_place_searches_the_table_of_a_track_cell(capsys: pytest.CaptureFixture[str]) -> None:
    grid = "x_mm=1600:2400:3 y_mm=-1300"
    argv = ("place", TRACK_CELL, "--search", "table", "--grid", grid, "--top", "3")
    code, report = run_json(capsys, *argv, "--workers", "1")
    assert code == 0
    assert isinstance(report, dict)
    assert report["search"] == "table"
    # source: demo-track-cell.json, table-1 at (2000, -1300, 700) mm, range -185..185 deg
    assert report["table_name"] == "table-1"
    assert report["grid"]["x_mm"] == pytest.approx([1600.0, 2000.0, 2400.0])
    assert report["current_score"] is not None  # the current table is on the grid
    best = report["best"][0]
    assert best["table"]["angle_range_deg"] == pytest.approx([-185.0, 185.0])
    assert best["table"]["position_mm"] == pytest.approx([best["x_mm"], best["y_mm"], 700.0])
    angles = [t["table_angle_deg"] for t in best["targets"] if t["table_angle_deg"] is not None]
    span = best["table"]["angle_span_deg"]
    assert span == (pytest.approx([min(angles), max(angles)]) if angles else None)
    assert main([*argv, "--quiet", "--workers", "1"]) == 0
    assert "Table placement for pb-arm6 (table-1): 3 table positions" in capsys.readouterr().out


def test_jointmap_reach_and_plan_run(capsys: pytest.CaptureFixture[str]) -> None:
    code, result = run_json(
        capsys, "jointmap", DEMO_CELL, "--joints", "j2,j3", "--resolution", "16", "--workers", "1"
    )
    assert code == 0
    assert result["shape"] == [16, 16]
    # the limit box of pb-arm6.toml: j2 -87..151, j3 -197..76 deg
    assert result["lower_deg"] == pytest.approx([-87.0, -197.0])
    assert result["upper_deg"] == pytest.approx([151.0, 76.0])
    code, reach = run_json(capsys, "reach", "pb-scara4", "--voxel-mm", "100", "--workers", "1")
    assert code == 0
    assert reach["tool_directions"] == 26
    # a planar arm reports an area in its plane instead (tests/spaces/test_planar_reach.py)
    code, planar = run_json(capsys, "reach", "pb-planar2r")
    assert code == 0
    assert planar["planar"] is True
    assert "tool_directions" not in planar
    code, plan = run_json(
        capsys, "plan", DEMO_CELL, "--from", "60,-20,20,0,90,0", "--to", "-60,-20,20,0,90,0"
    )
    assert code == 0
    assert plan["status"] in ("solved", "direct")


def test_report_and_schema(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    output = tmp_path / "review.html"
    code, out, _ = run(capsys, "report", DEMO_CELL, "-o", str(output))
    assert code == 0
    assert output.is_file()
    html = output.read_text(encoding="utf-8")
    assert "ISO 13855" in html
    assert "<script src=" not in html
    code, out, _ = run(capsys, "schema")
    assert code == 0
    # jsonschema (independent validator) accepts the demo cell against the printed schema
    jsonschema.validate(json.loads(Path(DEMO_CELL).read_text(encoding="utf-8")), json.loads(out))


def test_demo_working_copy_leaves_the_bundled_cell_alone(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from posebridge.resources import demo_working_folder

    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
    folder = demo_working_folder()
    assert folder == tmp_path / "posebridge" / "demo"
    copy = folder / "demo-cell.json"
    assert copy.read_bytes() == Path(DEMO_CELL).read_bytes()
    copy.write_text("{}", encoding="utf-8")  # an edited copy is kept, not overwritten
    demo_working_folder()
    assert copy.read_text(encoding="utf-8") == "{}"
    assert (folder / "demo-log.csv").read_bytes() == Path(DEMO_LOG).read_bytes()
    # the machine demo comes with its mesh files, relative to it as in the bundle
    assert (folder / "demo-machine-cell.json").is_file()
    assert (folder / "meshes" / "machine-housing.stl").read_bytes() == (
        ROBOTS / "meshes" / "machine-housing.stl"
    ).read_bytes()


def test_machine_demo_passes_its_checks(capsys: pytest.CaptureFixture[str]) -> None:
    cell = str(ROBOTS / "demo-machine-cell.json")
    code, report = run_json(capsys, "check", cell)
    # the demo's promise (its notes): every target reachable and clear on one branch
    assert code == 0
    assert report["error_count"] == 0
    assert report["consistent_branch"]["consistent"]
    code, out, _ = run(capsys, "paths", cell)
    assert code == 0, out


def test_print_results_is_the_shared_output_tail(capsys: pytest.CaptureFixture[str]) -> None:
    from pydantic import BaseModel

    from posebridge.cli.common import EXIT_FINDINGS, EXIT_OK, never_fails, print_results

    class Finding(BaseModel):
        severity: str

    class Result(BaseModel):
        name: str
        findings: list[Finding]

    clean = Result(name="a", findings=[Finding(severity="info")])
    warned = Result(name="b", findings=[Finding(severity="warning")])
    # our own contract (README, exit codes): one result prints a JSON object, several a list;
    # only error or warning findings give exit 1
    assert print_results(clean, lambda r: r.name, as_json=True) == EXIT_OK
    assert json.loads(capsys.readouterr().out) == {"name": "a", "findings": [{"severity": "info"}]}
    assert print_results([clean, warned], lambda r: r.name, as_json=True) == EXIT_FINDINGS
    assert [r["name"] for r in json.loads(capsys.readouterr().out)] == ["a", "b"]
    assert print_results([clean, warned], lambda r: r.name, as_json=False) == EXIT_FINDINGS
    assert capsys.readouterr().out == "a\n\nb\n"
    assert print_results(warned, lambda r: r.name, as_json=False, failed=never_fails) == EXIT_OK
