"""Issue 13, through the real kernel process and the real Jupyter client: oversized frame
headers before authentication on every socket, a replayed signed request, an unsigned kernel
(warned on loopback, refused off it), and hostile cells answered with errors."""
import json
import os
import socket
import struct
import subprocess
import time

import pytest
import zmq
from jupyter_client.session import Session

from conftest import BINARY, OUT, execute


def greeting():
    """The ZMTP 3.0 greeting of a NULL-mechanism client (RFC 23/ZMTP, "Greeting")."""
    g = bytes([0xFF, 0, 0, 0, 0, 0, 0, 0, 1, 0x7F, 3, 0]) + b"NULL".ljust(20, b"\0") + b"\0"
    return g.ljust(64, b"\0")


def hostile(port, length):
    """Completes the greeting, then announces a long frame of `length` bytes."""
    s = socket.create_connection(("127.0.0.1", port), timeout=5)
    try:
        s.sendall(greeting())
        s.sendall(bytes([0x02]) + struct.pack(">Q", length))
        time.sleep(0.2)
    except OSError:
        pass
    finally:
        s.close()


@pytest.mark.parametrize("length", [1 << 40, (1 << 64) - 1])
def test_oversized_frames_on_every_socket_leave_the_kernel_serving(kernel, length):
    km, kc = kernel
    info = km.get_connection_info()
    for name in ("shell_port", "iopub_port", "stdin_port", "control_port", "hb_port"):
        hostile(info[name], length)
    assert km.is_alive()
    reply, msgs = execute(kc, "help")
    assert reply["content"]["status"] == "ok"
    # The heartbeat still echoes.
    ctx = zmq.Context.instance()
    hb = ctx.socket(zmq.REQ)
    hb.linger = 0
    hb.connect(f"tcp://127.0.0.1:{info['hb_port']}")
    hb.send(b"ping")
    assert hb.poll(5000), "no heartbeat after the oversized frames"
    assert hb.recv() == b"ping"
    hb.close()


def test_a_replayed_request_is_not_run_again(kernel):
    km, kc = kernel
    info = km.get_connection_info()
    session = Session(key=info["key"].encode() if isinstance(info["key"], str) else info["key"],
                      signature_scheme=info["signature_scheme"])
    ctx = zmq.Context.instance()
    dealer = ctx.socket(zmq.DEALER)
    dealer.linger = 0
    dealer.connect(f"tcp://127.0.0.1:{info['shell_port']}")
    msg = session.msg("kernel_info_request", {})
    frames = session.serialize(msg)
    dealer.send_multipart(frames)
    assert dealer.poll(5000), "no reply to the first request"
    reply = session.deserialize(session.feed_identities(dealer.recv_multipart())[1])
    assert reply["msg_type"] == "kernel_info_reply"
    # The same signed frames again: dropped, no reply.
    dealer.send_multipart(frames)
    assert not dealer.poll(1500), "the replayed request was answered"
    dealer.close()
    reply, _ = execute(kc, "help")
    assert reply["content"]["status"] == "ok"


def connection_file(tmp_path, ip, key):
    ports = []
    for _ in range(5):
        s = socket.socket()
        s.bind(("127.0.0.1", 0))
        ports.append(s.getsockname()[1])
        s.close()
    cf = tmp_path / f"kernel-{ip.replace(':', '_')}.json"
    cf.write_text(json.dumps({
        "shell_port": ports[0], "iopub_port": ports[1], "stdin_port": ports[2],
        "control_port": ports[3], "hb_port": ports[4], "ip": ip, "key": key,
        "transport": "tcp", "signature_scheme": "hmac-sha256" if key else "",
    }))
    return cf


def test_an_unsigned_kernel_is_refused_off_loopback(tmp_path):
    cf = connection_file(tmp_path, "0.0.0.0", "")
    p = subprocess.run([str(BINARY), "kernel", "-f", str(cf)], capture_output=True, text=True,
                       timeout=20)
    assert p.returncode != 0
    assert "empty key" in p.stderr and "0.0.0.0" in p.stderr


def test_an_unsigned_kernel_on_loopback_warns(tmp_path):
    cf = connection_file(tmp_path, "127.0.0.1", "")
    p = subprocess.Popen([str(BINARY), "kernel", "-f", str(cf)], stderr=subprocess.PIPE,
                         text=True)
    try:
        time.sleep(1.0)
        assert p.poll() is None, "the unsigned loopback kernel did not start"
    finally:
        p.kill()
        _, err = p.communicate(timeout=10)
    assert "warning" in err and "empty key" in err


def test_hostile_cells_are_answered_with_errors(kernel):
    km, kc = kernel
    deep = "describe y across g where " + "(" * 1296 + "g = \"a\"" + ")" * 1296
    reply, msgs = execute(kc, deep)
    assert reply["content"]["status"] == "error"
    assert reply["content"]["ename"] == "SyntaxError"
    assert "32" in reply["content"]["evalue"]
    # is_complete on the same text answers too.
    kc.is_complete(deep)
    r = kc.get_shell_msg(timeout=10)
    assert r["content"]["status"] == "invalid"
    reply, _ = execute(kc, 'read "/dev/zero" as z')
    assert reply["content"]["ename"] == "DataError"
    fifo = OUT / "hardening.fifo"
    if fifo.exists():
        fifo.unlink()
    os.mkfifo(fifo)
    reply, _ = execute(kc, f'read "{fifo}" as z', timeout=10)
    assert reply["content"]["ename"] == "DataError"
    assert km.is_alive()
