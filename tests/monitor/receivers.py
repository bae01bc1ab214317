"""Real receivers on loopback for the tests: an SMTP server (aiosmtpd), an SMTP server that never
answers DATA, and a webhook receiver that checks Bloomline's signatures with its own code.

The webhook receiver follows the verification recipe of README.md
("Webhooks") using only the standard library (``hmac``, ``hashlib``); it
does not import Bloomline's signing code, so a test that passes shows the
documented recipe and the sender agree.
"""

from __future__ import annotations

import email
import email.policy
import hashlib
import hmac
import json
import shutil
import socket
import ssl
import subprocess
import threading
import time
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

from aiosmtpd.controller import Controller
from aiosmtpd.smtp import AuthResult, LoginPassword

REPLAY_WINDOW_S = 300  # README "Webhooks": refuse a timestamp more than five minutes from the receiver's clock


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


# ---------------------------------------------------------------- SMTP


class SmtpRecorder:
    """aiosmtpd handler keeping every accepted message (parsed) and who logged in."""

    def __init__(self, fail_first: int = 0):
        self.fail_first = fail_first
        self.seen = 0
        self.messages: list[email.message.EmailMessage] = []
        self.logins: list[str] = []
        self.lock = threading.Lock()

    async def handle_DATA(self, server, session, envelope):
        with self.lock:
            self.seen += 1
            if self.seen <= self.fail_first:
                return "451 4.3.0 Try again later"  # RFC 5321 §4.2.3: transient failure
            self.messages.append(email.message_from_bytes(envelope.content, policy=email.policy.default))
            if session.authenticated:
                self.logins.append(session.auth_data.login.decode() if session.auth_data else "")
        return "250 OK"

    def by_key(self) -> dict[str, list]:
        """Messages grouped by their X-Bloomline-Idempotency-Key."""
        out: dict[str, list] = {}
        with self.lock:
            for m in self.messages:
                out.setdefault(m["X-Bloomline-Idempotency-Key"], []).append(m)
        return out


class _Passwords:
    """aiosmtpd authenticator: LOGIN/PLAIN with one user and password."""

    def __init__(self, user: str, password: str):
        self.user, self.password = user.encode(), password.encode()

    def __call__(self, server, session, envelope, mechanism, auth_data):
        ok = isinstance(auth_data, LoginPassword) and (auth_data.login, auth_data.password) == (self.user,
                                                                                                self.password)
        return AuthResult(success=ok, handled=False, auth_data=auth_data if ok else None)


def start_smtp(handler: SmtpRecorder, *, tls_context: ssl.SSLContext | None = None,
               login: tuple[str, str] | None = None) -> Controller:
    """An aiosmtpd server on a free loopback port; STARTTLS required when ``tls_context``, login when ``login``."""
    kwargs = {}
    if tls_context is not None:
        kwargs.update(tls_context=tls_context, require_starttls=True)
    if login is not None:
        kwargs.update(authenticator=_Passwords(*login), auth_required=True, auth_require_tls=tls_context is not None)
    controller = Controller(handler, hostname="127.0.0.1", port=free_port(), server_hostname="localhost", **kwargs)
    controller.start()
    return controller


def tls_files(folder: Path) -> tuple[Path, Path]:
    """A self-signed certificate for ``localhost`` and 127.0.0.1 and its key, made with the openssl command."""
    if shutil.which("openssl") is None:
        import pytest

        pytest.skip("the openssl command is needed to make a test certificate")
    cert, key = folder / "server.crt", folder / "server.key"
    subprocess.run(["openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj", "/CN=localhost",
                    "-addext", "subjectAltName=DNS:localhost,IP:127.0.0.1", "-keyout", str(key), "-out", str(cert)],
                   check=True, capture_output=True)
    return cert, key


class HungSmtpServer:
    """Accepts connections, answers the greeting, EHLO, MAIL and RCPT, and never answers DATA."""

    def __init__(self):
        self.sock = socket.create_server(("127.0.0.1", 0))
        self.port = self.sock.getsockname()[1]
        self.data_commands = 0
        self.connections = 0
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._clients: list[socket.socket] = []
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self):
        self.sock.settimeout(0.2)
        while not self._stop.is_set():
            try:
                conn, _ = self.sock.accept()
            except OSError:
                continue
            self.connections += 1
            self._clients.append(conn)
            t = threading.Thread(target=self._serve, args=(conn,), daemon=True)
            t.start()
            self._threads.append(t)

    def _serve(self, conn: socket.socket):
        f = conn.makefile("rb")
        try:
            conn.sendall(b"220 hung.test ESMTP\r\n")
            for line in f:
                cmd = line.strip().upper()
                if cmd.startswith((b"EHLO", b"HELO")):
                    conn.sendall(b"250 hung.test\r\n")
                elif cmd.startswith((b"MAIL", b"RCPT", b"RSET", b"NOOP")):
                    conn.sendall(b"250 OK\r\n")
                elif cmd.startswith(b"DATA"):
                    self.data_commands += 1
                    self._stop.wait()  # never answer
                    return
                elif cmd.startswith(b"QUIT"):
                    conn.sendall(b"221 bye\r\n")
                    return
        except OSError:
            return

    def close(self):
        self._stop.set()
        for c in self._clients:
            try:
                c.close()
            except OSError:
                pass
        self.sock.close()


# ---------------------------------------------------------------- webhooks


def verify_signature(secret: str, headers, body: bytes, now: float, window_s: float = REPLAY_WINDOW_S) -> str | None:
    """The README recipe, written independently: None when the request is genuine, else the reason."""
    ts = headers.get("X-Bloomline-Timestamp")
    given = headers.get("X-Bloomline-Signature")
    if not ts or not given or not ts.isdigit():
        return "missing signature headers"
    if abs(now - int(ts)) > window_s:
        return "timestamp outside the replay window"
    expected = "v1=" + hmac.new(secret.encode("utf-8"), ts.encode("ascii") + b"." + body, hashlib.sha256).hexdigest()
    if not any(hmac.compare_digest(expected, part.strip()) for part in given.split(",")):
        return "signature does not match"
    return None


class WebhookReceiver:
    """A threaded HTTP server on loopback: verifies each POST, keeps every request, processes each event id once.

    ``fail_first`` answers 500 to that many genuine requests first; ``delay_s``
    waits before answering (a slow receiver).
    """

    def __init__(self, secret: str, *, fail_first: int = 0, delay_s: float = 0.0):
        self.secret, self.fail_first, self.delay_s = secret, fail_first, delay_s
        self.requests: list[dict] = []  # every request: headers, body, status answered, reason
        self.processed: dict[str, dict] = {}  # event id -> payload, the first time it was processed
        self.lock = threading.Lock()
        receiver = self

        class Handler(BaseHTTPRequestHandler):
            def do_POST(self):  # noqa: N802 - http.server's naming
                body = self.rfile.read(int(self.headers.get("Content-Length", 0)))
                status, reason = receiver.handle(dict(self.headers.items()), body, time.time())
                if receiver.delay_s:
                    time.sleep(receiver.delay_s)
                self.send_response(status)
                self.send_header("Content-Type", "text/plain")
                self.end_headers()
                self.wfile.write(reason.encode())

            def log_message(self, *args):
                pass

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.server.daemon_threads = True
        self.url = f"http://127.0.0.1:{self.server.server_address[1]}/hooks/bloomline"
        threading.Thread(target=self.server.serve_forever, daemon=True).start()

    def handle(self, headers: dict, body: bytes, now: float) -> tuple[int, str]:
        with self.lock:
            problem = verify_signature(self.secret, headers, body, now)
            record = {"headers": headers, "body": body, "time": now}
            self.requests.append(record)
            if problem is not None:
                record.update(status=401, reason=problem)
                return 401, problem
            if sum(1 for r in self.requests if r.get("status") == 500) < self.fail_first:
                record.update(status=500, reason="busy")
                return 500, "busy"
            event_id = headers["X-Bloomline-Event-Id"]
            if event_id in self.processed:
                record.update(status=200, reason="duplicate")
                return 200, "duplicate"
            self.processed[event_id] = json.loads(body)
            record.update(status=200, reason="processed")
            return 200, "processed"

    def by_event(self) -> dict[str, list[dict]]:
        out: dict[str, list[dict]] = {}
        with self.lock:
            for r in self.requests:
                if r.get("status") != 401:
                    out.setdefault(r["headers"]["X-Bloomline-Event-Id"], []).append(r)
        return out

    def close(self):
        self.server.shutdown()
        self.server.server_close()
