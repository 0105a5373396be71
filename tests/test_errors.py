"""One family of input errors: every subclass of ``posebridge.errors.InputError`` is the
user's fault at every front door (command line exit 2, HTTP 422 with the message, a failed
job with the message)."""

from __future__ import annotations

import inspect
import threading

import pytest
from fastapi.testclient import TestClient

from posebridge import errors
from posebridge.api.app import create_app
from posebridge.api.lanes import WorkerRefusedError
from posebridge.api.server import ServerConfigError
from posebridge.api.settings import Settings
from posebridge.cell.joint_log import JointLogError, JointLogTooLongError
from posebridge.cell.model import CellFileError
from posebridge.cli import EXIT_BAD_INPUT, main
from posebridge.cli.common import CommandLineInputError
from posebridge.errors import InputError
from posebridge.geometry.errors import GeometryInputError, MeshFileError
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.planning.blended_timing import NoParameterizationError
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.time_scaling import TimeScalingInputError
from posebridge.report import ReportError
from posebridge.review.comments import CommentInputError
from posebridge.robot.errors import RobotDescriptionError
from posebridge.spaces.errors import SpacesInputError
from posebridge.transforms import TransformError

AREA_ERRORS = (
    CommandLineInputError,
    RobotDescriptionError,
    TransformError,
    KinematicsInputError,
    GeometryInputError,
    MeshFileError,
    CellFileError,
    JointLogError,
    JointLogTooLongError,
    PlanningInputError,
    NoParameterizationError,
    TimeScalingInputError,
    SpacesInputError,
    ReportError,
    CommentInputError,
    ServerConfigError,
)
MESSAGE = "bad value: the reason"


def _all_subclasses(cls: type) -> set[type]:
    found = set()
    for sub in cls.__subclasses__():
        found |= {sub, *_all_subclasses(sub)}
    return found


def _raise(cls: type[InputError]) -> InputError:
    if "problems" in inspect.signature(cls.__init__).parameters:
        return cls([MESSAGE])  # type: ignore[call-arg]
    return cls(MESSAGE)


def test_every_area_error_is_an_input_error() -> None:
    # the areas listed here cover every subclass the imported package defines; the one outside
    # them carries a reviewer worker's refusal with its own HTTP status
    # (tests/api/test_review_priority.py)
    outside = {c for c in _all_subclasses(InputError) if not issubclass(c, AREA_ERRORS)}
    assert outside == {WorkerRefusedError}
    assert set(AREA_ERRORS) <= _all_subclasses(InputError)


@pytest.mark.parametrize("cls", AREA_ERRORS, ids=lambda cls: cls.__name__)
def test_command_line_exits_2_with_the_message(
    cls: type[InputError], monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    def fail() -> None:
        raise _raise(cls)

    monkeypatch.setattr("posebridge.cell.cell_json_schema", fail)
    assert main(["schema"]) == EXIT_BAD_INPUT
    assert capsys.readouterr().err == f"posebridge schema: {MESSAGE}\n"


@pytest.mark.parametrize("cls", AREA_ERRORS, ids=lambda cls: cls.__name__)
def test_http_api_answers_422_with_the_message(
    cls: type[InputError], monkeypatch: pytest.MonkeyPatch
) -> None:
    def fail() -> None:
        raise _raise(cls)

    monkeypatch.setattr("posebridge.api.routes.robots.bundled_robots", fail)
    with TestClient(create_app(Settings(warm_up=False)), base_url="http://127.0.0.1") as client:
        response = client.get("/api/robots")
    assert response.status_code == 422  # RFC 9110 15.5.21 Unprocessable Content
    assert response.json() == {"detail": MESSAGE}


def test_jobs_fail_with_the_message() -> None:
    app = create_app(Settings(warm_up=False))
    for index, cls in enumerate(AREA_ERRORS):

        def work(progress: object, cancel: threading.Event, cls: type = cls) -> None:
            raise _raise(cls)

        job = app.state.jobs.start("test", f"client-{index}", work)
        pause = threading.Event()
        for _ in range(6000):  # the job runs on the manager's worker thread
            if not job.active:
                break
            pause.wait(0.01)
        assert (job.state, job.error) == ("failed", MESSAGE), cls.__name__


def test_positive_number_rule() -> None:
    # the rule and its messages (closed form: x > 0 and finite; >= 0; > 0 or +inf)
    assert errors.check_positive("a", 2, InputError) == 2.0
    assert errors.check_positive("a", 0.0, InputError, allow_zero=True) == 0.0
    assert errors.check_positive("a", float("inf"), InputError, allow_inf=True) == float("inf")
    for value, options, expected in [
        (0.0, {}, "a: expected a positive finite number, got 0.0"),
        (float("nan"), {}, "a: expected a positive finite number, got nan"),
        (float("inf"), {}, "a: expected a positive finite number, got inf"),
        (-1.0, {"allow_zero": True}, "a: expected a finite number >= 0, got -1.0"),
        (float("-inf"), {"allow_inf": True}, "a: expected a positive number or infinity, got -inf"),
    ]:
        with pytest.raises(PlanningInputError) as raised:
            errors.check_positive("a", value, PlanningInputError, **options)  # type: ignore[arg-type]
        assert str(raised.value) == expected
