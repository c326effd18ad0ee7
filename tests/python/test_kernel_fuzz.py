"""Hostile input: the kernel stays up and answers after thousands of malformed
messages on every socket (loopback only, a bounded, seeded count).

Frames follow the Jupyter messaging protocol 5.3 wire format (published by the
Jupyter project): routing identities, `<IDS|MSG>`, HMAC-SHA256 signature of the
four JSON parts, header, parent header, metadata, content. Each message below
breaks one rule of it; pyzmq (jupyter_client's transport) sends the raw frames.
"""
import hashlib
import hmac
import json
import random
import uuid

import zmq
from jupyter_client.manager import start_new_kernel

from conftest import install_kernelspec

install_kernelspec()
TIMEOUT = 1800
MESSAGES_PER_SOCKET = 1500
SEED = 20261204


def signed(key, parts):
    mac = hmac.new(key, digestmod=hashlib.sha256)
    for part in parts:
        mac.update(part)
    return mac.hexdigest().encode()


def header(msg_type, **overrides):
    h = {"msg_id": str(uuid.uuid4()), "session": "fuzz", "username": "fuzz", "date": "2026-12-04T00:00:00Z",
         "msg_type": msg_type, "version": "5.3"}
    h.update(overrides)
    return h


def malformed(rng, key):
    """One malformed multipart message (a list of byte frames)."""
    kind = rng.randrange(10)
    enc = lambda v: json.dumps(v).encode()  # noqa: E731
    good = [enc(header("kernel_info_request")), b"{}", b"{}", b"{}"]
    if kind == 0:  # random frames
        return [rng.randbytes(rng.randrange(0, 64)) for _ in range(rng.randrange(1, 8))]
    if kind == 1:  # no delimiter
        return [b"id", signed(key, good), *good]
    if kind == 2:  # bad signature
        return [b"<IDS|MSG>", b"0" * 64, *good]
    if kind == 3:  # missing signature frame (and so too few frames)
        return [b"<IDS|MSG>", *good]
    if kind == 4:  # signed, invalid JSON in a random part
        parts = list(good)
        parts[rng.randrange(4)] = rng.randbytes(rng.randrange(1, 40))
        return [b"<IDS|MSG>", signed(key, parts), *parts]
    if kind == 5:  # signed, header missing a required field
        h = header("execute_request")
        del h[rng.choice(["msg_id", "session", "msg_type"])]
        parts = [enc(h), b"{}", b"{}", enc({"code": "1"})]
        return [b"<IDS|MSG>", signed(key, parts), *parts]
    if kind == 6:  # signed, unknown message type
        parts = [enc(header(f"nonsense_{rng.randrange(1000)}_request")), b"{}", b"{}", b"{}"]
        return [b"<IDS|MSG>", signed(key, parts), *parts]
    if kind == 7:  # signed, content of the wrong shape for a real request
        msg_type = rng.choice(["execute_request", "complete_request", "inspect_request", "history_request",
                               "is_complete_request", "shutdown_request"])
        content = rng.choice([[], 5, "text", {"code": 5}, {"cursor_pos": -3}, {"hist_access_type": "sideways"}])
        if msg_type == "shutdown_request":  # only shapes that must not shut the kernel down
            content = rng.choice([[], 5, "text", {"restart": "yes"}])
        parts = [enc(header(msg_type)), b"{}", b"{}", enc(content)]
        return [b"<IDS|MSG>", signed(key, parts), *parts]
    if kind == 8:  # header of the wrong JSON type
        parts = [enc(rng.choice([[], 3, "header", None])), b"{}", b"{}", b"{}"]
        return [b"<IDS|MSG>", signed(key, parts), *parts]
    # megabytes of content, signed, for a harmless request type
    parts = [enc(header("is_complete_request")), b"{}", b"{}", enc({"code": "x" * rng.randrange(1, 3_000_000)})]
    return [b"<IDS|MSG>", signed(key, parts), *parts]


def test_the_kernel_survives_malformed_messages_on_every_socket():
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    try:
        reply = kc.execute_interactive("let before_fuzz = 11;", timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok"
        info = km.get_connection_info()
        key = info["key"] if isinstance(info["key"], bytes) else info["key"].encode()
        context = zmq.Context()
        rng = random.Random(SEED)
        sent = 0
        for port_name, kind in [("shell_port", zmq.DEALER), ("control_port", zmq.DEALER),
                                ("stdin_port", zmq.DEALER), ("hb_port", zmq.REQ), ("iopub_port", zmq.SUB)]:
            socket = context.socket(kind)
            socket.linger = 0
            socket.connect(f"tcp://{info['ip']}:{info[port_name]}")
            for _ in range(MESSAGES_PER_SOCKET if kind == zmq.DEALER else 50):
                frames = malformed(rng, key)
                if kind == zmq.DEALER:
                    socket.send_multipart(frames)
                elif kind == zmq.REQ:  # the heartbeat echoes whatever it gets
                    socket.send_multipart(frames)
                    assert socket.poll(10_000), "the heartbeat stopped answering"
                    assert socket.recv_multipart() == frames
                else:  # a SUB socket cannot send; subscribing with junk must not matter
                    socket.setsockopt(zmq.SUBSCRIBE, rng.randbytes(8))
                sent += 1
            # Drain what the kernel answered (error replies to well-signed bad requests).
            while kind == zmq.DEALER and socket.poll(200):
                socket.recv_multipart()
            socket.close()
        context.term()
        assert sent > 3 * MESSAGES_PER_SOCKET
        # Still up, still answering, state intact.
        kc.kernel_info()
        reply = kc.get_shell_msg(timeout=120)
        while reply["msg_type"] != "kernel_info_reply":
            reply = kc.get_shell_msg(timeout=120)
        outputs = []
        reply = kc.execute_interactive("before_fuzz + 1", timeout=600, output_hook=outputs.append)
        assert reply["content"]["status"] == "ok"
        results = [m for m in outputs if m["msg_type"] == "execute_result"]
        assert results and results[0]["content"]["data"]["text/plain"] == "12"
        assert km.is_alive()
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)
