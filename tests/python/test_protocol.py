"""Protocol behaviour through the real client (jupyter_client, pyzmq): signatures, malformed
frames, interrupts, stop_on_error, control while computing, shutdown."""
import json
import time

import pytest
import zmq
from jupyter_client.manager import start_new_kernel
from jupyter_client.session import Session

from conftest import execute, start_pause


def test_wrongly_signed_execute_is_not_executed(kernel):
    km, kc = kernel
    info = km.get_connection_info()
    ctx = zmq.Context.instance()
    sock = ctx.socket(zmq.DEALER)
    sock.connect(f"tcp://{info['ip']}:{info['shell_port']}")
    forger = Session(key=b"not-the-key", signature_scheme="hmac-sha256")
    msg = forger.msg("execute_request", content={"code": "help", "silent": False, "store_history": True,
                                                 "user_expressions": {}, "allow_stdin": False, "stop_on_error": True})
    forger.send(sock, msg)
    # Unsigned and truncated messages are dropped too.
    sock.send_multipart([b"<IDS|MSG>", b"", b"{}", b"{}", b"{}", b"{}"])
    sock.send_multipart([b"<IDS|MSG>", b"abc"])
    sock.send_multipart([b"garbage"])
    # Correctly signed frames that are not valid JSON, or lack a msg_type, are dropped after
    # verification.
    import hashlib
    import hmac as hmac_mod
    for parts in ([b"{", b"{}", b"{}", b"{}"], [b"{}", b"{}", b"{}", b"{}"], [b"[]", b"{}", b"{}", b"{}"]):
        mac = hmac_mod.new(km.session.key, digestmod=hashlib.sha256)
        for p in parts:
            mac.update(p)
        sock.send_multipart([b"<IDS|MSG>", mac.hexdigest().encode()] + parts)
    assert sock.poll(1500) == 0, "the kernel answered a forged or malformed message"
    # Nothing was broadcast for the forged request either.
    deadline = time.time() + 0.5
    while time.time() < deadline:
        try:
            m = kc.get_iopub_msg(timeout=0.1)
        except Exception:
            continue
        assert m["parent_header"].get("msg_id") != msg["header"]["msg_id"]
    sock.close(0)
    # The kernel is alive and still counts correctly.
    reply, _ = execute(kc, "help")
    assert reply["content"]["status"] == "ok"


def test_interrupt_during_a_long_computation_returns_to_idle(kernel):
    km, kc = kernel
    msg_id = start_pause(kc, 30)
    time.sleep(0.3)
    t0 = time.time()
    km.interrupt_kernel()
    reply = kc.get_shell_msg(timeout=10)
    assert reply["parent_header"]["msg_id"] == msg_id
    assert reply["content"]["status"] == "error"
    assert reply["content"]["ename"] == "Interrupted"
    assert time.time() - t0 < 5
    reply, _ = execute(kc, "help read")
    assert reply["content"]["status"] == "ok"


def test_control_and_heartbeat_answer_while_a_cell_computes(kernel):
    km, kc = kernel
    msg_id = kc.execute("pause 3")
    time.sleep(0.3)
    t0 = time.time()
    msg = kc.session.msg("kernel_info_request")
    kc.control_channel.send(msg)
    rep = kc.control_channel.get_msg(timeout=2)
    assert rep["msg_type"] == "kernel_info_reply"
    assert time.time() - t0 < 1.5
    assert kc.is_alive()
    km.interrupt_kernel()
    while True:
        r = kc.get_shell_msg(timeout=10)
        if r["parent_header"]["msg_id"] == msg_id:
            break


def test_stop_on_error_aborts_queued_cells(kernel):
    km, kc = kernel
    # The failing cell takes a moment, so the next two are surely queued behind it.
    first = kc.execute("pause 0.5\nanova y across g in nothing")
    second = kc.execute("help")
    third = kc.execute("help", stop_on_error=False)
    replies = {}
    while len(replies) < 3:
        r = kc.get_shell_msg(timeout=10)
        replies[r["parent_header"]["msg_id"]] = r["content"]["status"]
    assert replies[first] == "error"
    assert replies[second] == "aborted"
    assert replies[third] == "aborted"
    reply, _ = execute(kc, "help")
    assert reply["content"]["status"] == "ok"


def test_error_names_the_line_and_suggests():
    km, kc = start_new_kernel(kernel_name="partita")
    try:
        reply, msgs = execute(kc, "help\nanvoa y across g")
        assert reply["content"]["ename"] == "SyntaxError"
        assert reply["content"]["evalue"].startswith("line 2, column 1:")
        assert "did you mean `anova`" in reply["content"]["evalue"]
        assert [m["msg_type"] for m in msgs] == ["error"]
        assert any("^^^^^" in line for line in reply["content"]["traceback"])
        # Execution counts go up for each counted cell, errors included.
        r2, _ = execute(kc, "help")
        assert r2["content"]["execution_count"] == reply["content"]["execution_count"] + 1
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_outputs_arrive_per_statement_and_a_failure_keeps_earlier_ones(tmp_path):
    csv = tmp_path / "d.csv"
    csv.write_text("g,y\na,1\na,2\nb,3\nb,5\n")
    km, kc = start_new_kernel(kernel_name="partita")
    try:
        reply, msgs = execute(kc, f'read "{csv}" as d\ndescribe y across g\nanova y across nope')
        assert [m["msg_type"] for m in msgs] == ["display_data", "display_data", "error"]
        assert reply["content"]["ename"] == "DataError"
        assert reply["content"]["evalue"] == 'line 3, column 16: dataset d has no column "nope" (a factor)'
        reply, msgs = execute(kc, "describe y across g\nanova y across g")
        assert [m["msg_type"] for m in msgs] == ["display_data", "execute_result"]
        data = msgs[-1]["content"]["data"]
        for mime in ["text/html", "image/svg+xml", "text/plain", "text/markdown", "application/vnd.partita.result+json"]:
            assert mime in data, mime
        assert data["text/markdown"].startswith("g: F(1, 2) = ")
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_shutdown_echoes_restart_and_exits():
    km, kc = start_new_kernel(kernel_name="partita")
    kc.stop_channels()
    client = km.client()
    client.start_channels()
    msg = client.session.msg("shutdown_request", content={"restart": True})
    client.control_channel.send(msg)
    rep = client.control_channel.get_msg(timeout=5)
    assert rep["content"] == {"status": "ok", "restart": True}
    deadline = time.time() + 5
    while km.is_alive() and time.time() < deadline:
        time.sleep(0.05)
    assert not km.is_alive()
    client.stop_channels()
    km.cleanup_resources()


def test_unknown_request_gets_an_error_reply(kernel):
    km, kc = kernel
    msg = kc.session.msg("made_up_request", content={})
    kc.shell_channel.send(msg)
    rep = kc.get_shell_msg(timeout=5)
    assert rep["msg_type"] == "made_up_reply"
    assert rep["content"]["status"] == "error"


def test_sigint_interrupts_like_the_message():
    import os
    import signal
    km, kc = start_new_kernel(kernel_name="partita")
    try:
        msg_id = start_pause(kc, 30)
        time.sleep(0.2)
        os.kill(km.provisioner.process.pid, signal.SIGINT)
        reply = kc.get_shell_msg(timeout=10)
        assert reply["content"]["ename"] == "Interrupted"
        assert km.is_alive()
        r, _ = execute(kc, "help")
        assert r["content"]["status"] == "ok"
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_silent_cells_broadcast_nothing_and_do_not_count(kernel):
    km, kc = kernel
    r1, _ = execute(kc, "help")
    msg_id = kc.execute("help", silent=True)
    reply = kc.get_shell_msg(timeout=10)
    assert reply["parent_header"]["msg_id"] == msg_id
    seen = []
    while True:
        m = kc.get_iopub_msg(timeout=10)
        if m["parent_header"].get("msg_id") != msg_id:
            continue
        seen.append(m["msg_type"])
        if m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
            break
    assert seen == ["status", "status"]
    r2, _ = execute(kc, "help")
    assert r2["content"]["execution_count"] == r1["content"]["execution_count"] + 1
