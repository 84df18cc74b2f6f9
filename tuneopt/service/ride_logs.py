"""A ride log sent with a job, checked when the job is submitted.

The log is read by the project's ride-log reader from a private temporary folder, exactly as
``tuneopt fit`` reads a log file, so that a log the fit could not read is refused at once with
the same problems, each by its line and column (422, field ``ride_log``). A log whose header
names the setup it was ridden on (``# setup: FILE``) needs that file among the files sent
(a ``side`` part of a multipart submission); its name must lead down from the log's folder.
"""

from __future__ import annotations

import hashlib
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tuneopt.model import FieldProblem, InputError, Scenario
from tuneopt.ridelog import load_ridden_setup, read_ride_log
from tuneopt.service.uploads import leads_down, plain_name, without

__all__ = ["JSON_LOG_NAME", "RideLogUpload", "check_ride_log"]

FIELD = "ride_log"
JSON_LOG_NAME = "ride_log.csv"  # the name a log sent as a JSON string is read under


@dataclass(frozen=True)
class RideLogUpload:
    """A ride log as sent: its file's name, its bytes, and the other files sent with it (a
    multipart submission's side files), by name."""

    name: str
    content: bytes
    side: Sequence[tuple[str, bytes]] = ()


def check_ride_log(upload: RideLogUpload, scenario: Scenario) -> dict[str, Any]:
    """Read the log against ``scenario``'s hardware, and the setup it was ridden on; what the
    fit needs to know of them: the log's name, size, digest, rate and length, the ridden setup
    (None: the scenario's own) and its label. InputError naming ``ride_log`` with every
    problem the reader found, each starting with its line."""
    name = plain_name(upload.name or JSON_LOG_NAME, FIELD)
    with tempfile.TemporaryDirectory(prefix="tuneopt-ride-log-") as tmp:
        root = Path(tmp)
        for other, body in upload.side:
            (root / plain_name(other, "side")).write_bytes(body)
        path = root / name
        path.write_bytes(upload.content)
        shown = (f"{root.resolve()}/", f"{root}/")
        try:
            log = read_ride_log(path, scenario=scenario)
        except InputError as exc:
            raise InputError(
                [FieldProblem(FIELD, without(str(p), shown)) for p in exc.problems]
            ) from None
        label = "the scenario's current setup"
        if log.setup_file is not None:
            _check_setup_file(log.setup_file, root)
            label = f"the setup in {log.setup_file} (named by the log)"
        try:
            setup = load_ridden_setup(log, path, scenario)
        except InputError as exc:
            raise InputError(
                [FieldProblem(FIELD, without(str(p), shown)) for p in exc.problems]
            ) from None
    return {
        "log": name,
        "log_bytes": len(upload.content),
        "log_sha256": hashlib.sha256(upload.content).hexdigest(),
        "sample_rate_hz": log.sample_rate_hz,
        "duration_s": log.duration_s,
        "ridden_setup": None if log.setup_file is None else setup.model_dump(mode="json"),
        "setup_label": label,
    }


def _check_setup_file(name: str, root: Path) -> None:
    """The ridden setup a log's header names is among the files sent, beside the log."""
    if not leads_down(name):
        raise InputError.single(
            FIELD,
            f"its setup line names {name!r}: a log sent to the service may name only a file "
            "sent with it (no absolute path, no '..')",
        )
    if not (root / name).is_file():
        raise InputError.single(
            FIELD,
            f"its setup line names {name!r}, which is not among the files sent: send it as a "
            "'side' part of a multipart/form-data submission, or leave the line out when the "
            "log was ridden on the scenario's own setup",
        )
