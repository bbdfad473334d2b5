"""Shared paths and helpers for the tests that need a real Jupyter client."""
import os
import pathlib
import queue

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
BINARY = pathlib.Path(os.environ.get("PARTITA_BIN", ROOT / "target" / "debug" / "partita"))
OUT = ROOT / "tests" / "out"
OUT.mkdir(exist_ok=True)


def bundle_of(msgs):
    """The Partita result bundle of the last output among iopub messages."""
    for m in reversed(msgs):
        data = m["content"].get("data", {})
        if "application/vnd.partita.result+json" in data:
            return data["application/vnd.partita.result+json"]
    raise AssertionError("no result bundle in %r" % [m["msg_type"] for m in msgs])


def execute(kc, code, timeout=30):
    """Runs code; returns (reply, iopub messages between busy and idle)."""
    msg_id = kc.execute(code)
    reply = kc.get_shell_msg(timeout=timeout)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=timeout)
    msgs = []
    while True:
        m = kc.get_iopub_msg(timeout=timeout)
        if m["parent_header"].get("msg_id") != msg_id:
            continue
        if m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
            break
        if m["msg_type"] not in ("status", "execute_input"):
            msgs.append(m)
    return reply, msgs


def start_pause(kc, seconds):
    """Starts the test-only `pause` and returns its msg_id once the cell is running."""
    msg_id = kc.execute(f"pause {seconds}")
    while True:
        m = kc.get_iopub_msg(timeout=10)
        if m["parent_header"].get("msg_id") == msg_id and m["msg_type"] == "execute_input":
            return msg_id


@pytest.fixture(scope="module")
def kernel():
    from jupyter_client.manager import start_new_kernel

    km, kc = start_new_kernel(kernel_name="partita")
    yield km, kc
    kc.stop_channels()
    km.shutdown_kernel(now=True)
