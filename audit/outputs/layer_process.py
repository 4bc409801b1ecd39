"""The second process that writes the GeoPackage's layers: ``python layer_process.py <plan.json>``.

The plan (written by :mod:`audit.outputs.geopackage`) names the GeoPackage, the file to write a
failure into and the process that started this one. The layers come on standard input, one
line of JSON each as soon as the parent has saved it (``null`` when there are no more): an Arrow
IPC file of the layer's features prepared as ``pyogrio.write_dataframe`` prepares them, with the
layer's name, geometry column and type, CRS and creation options. Each file is read and handed
to ``pyogrio.write_arrow`` one record batch at a time, in the order they come (not memory-mapped:
a mapped file's pages stay in the process's memory until the whole layer is written). Standard
input ending before ``null`` means the parent went away: the writer stops as interrupted.

The module imports nothing of the audit package (it runs by its path, so starting it costs only
pyarrow's and pyogrio's imports). It exits 0 when every layer is written; on a failure it writes
what went wrong as JSON (``errno``, ``strerror``, ``message``) into the plan's ``error`` file and
exits 2; without pyarrow or pyogrio it exits 3 before writing anything (the parent then writes
the layers itself); interrupted, it exits 130. On Linux it dies with the process that started it, so a
killed run leaves no writer behind.
"""

from __future__ import annotations

import ctypes
import json
import os
import signal
import sys
import warnings
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

EXIT_FAILED = 2
EXIT_CANNOT_START = 3  # pyarrow or pyogrio cannot be imported here: the parent writes the layers itself
EXIT_INTERRUPTED = 130
_PR_SET_PDEATHSIG = 1  # Linux, include/uapi/linux/prctl.h


def _die_with_parent(parent: int) -> None:
    """Ask Linux to kill this process when its parent ends; elsewhere nothing is done."""
    if not sys.platform.startswith("linux"):
        return
    try:
        ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, signal.SIGKILL)
    except (OSError, AttributeError):
        return
    if os.getppid() != parent:  # the parent ended before the request took effect
        os._exit(EXIT_INTERRUPTED)


class ParentGone(Exception):
    """Standard input ended before the parent said there were no more layers."""


def layers_handed_over(lines: Iterable[str]) -> Iterator[dict[str, Any]]:
    """The layers the parent hands over, one JSON line each, until its ``null``.

    >>> list(layers_handed_over(['{"name": "pipes"}\\n', 'null\\n']))
    [{'name': 'pipes'}]
    """
    for line in lines:
        layer = json.loads(line)
        if layer is None:
            return
        yield layer
    raise ParentGone


def write_planned_layers(plan: dict[str, Any], layers: Iterable[dict[str, Any]]) -> None:
    """Write ``layers`` into the GeoPackage of ``plan``, one after the other."""
    import pyarrow as pa
    import pyogrio

    for layer in layers:
        with pa.OSFile(layer["arrow"]) as source:  # read batch by batch: only the batch GDAL is writing is in memory
            reader = pa.ipc.open_file(source)
            batches = (reader.get_batch(place) for place in range(reader.num_record_batches))
            pyogrio.write_arrow(
                pa.RecordBatchReader.from_batches(reader.schema, batches), plan["path"], layer=layer["name"], driver="GPKG",
                geometry_name=layer["geometry_name"], geometry_type=layer["geometry_type"], crs=layer["crs"], layer_options=layer["options"],
            )  # fmt: skip


def main(argv: list[str]) -> int:
    """Run the plan whose path is ``argv[0]``; return the exit code."""
    plan = json.loads(Path(argv[0]).read_text(encoding="utf-8"))
    _die_with_parent(int(plan["parent"]))
    warnings.simplefilter("ignore")  # as the command line: GDAL's notices are not the user's concern
    try:
        import pyarrow  # noqa: F401
        import pyogrio  # noqa: F401
    except ImportError:
        return EXIT_CANNOT_START
    try:
        write_planned_layers(plan, layers_handed_over(sys.stdin))
    except (KeyboardInterrupt, ParentGone):
        return EXIT_INTERRUPTED
    except Exception as error:  # every failure goes back to the parent as words, never as a traceback
        said = {"errno": getattr(error, "errno", None), "strerror": getattr(error, "strerror", None), "message": str(error) or type(error).__name__}
        Path(plan["error"]).write_text(json.dumps(said), encoding="utf-8")
        return EXIT_FAILED
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
