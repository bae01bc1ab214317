"""How a finished message leaves Bloomline: a mailbox folder, an SMTP server, or a webhook call.

:class:`MailboxTransport` writes one ``.eml`` file per message into a
folder (the demo's mailbox), :class:`SmtpTransport` talks to an SMTP server
with :mod:`smtplib` (STARTTLS with certificate and host-name checks, and
login when configured), :class:`WebhookTransport` POSTs signed JSON with
:mod:`requests`. All raise on failure; retrying is the sender's job
(:func:`monitor.alerting.notify.send_due`).

Each transport can open a ``session()`` for a round of messages: the SMTP
session keeps one connection for the round, so the sender records a message
as sent as soon as the server has accepted its DATA, before the connection
is closed.
"""

from __future__ import annotations

import contextlib
import os
import re
import smtplib
import ssl
import tempfile
from collections.abc import Iterator
from email.message import EmailMessage
from pathlib import Path
from typing import Protocol

import requests

from monitor.alerting import webhooks as hooks

USER_AGENT = "bloomline-webhooks/0.1"


class Transport(Protocol):
    sender: str

    def send(self, message) -> str | None:
        """Deliver one message or raise; returns the server's answer when there is one."""


class MailboxTransport:
    """Write each message as ``<folder>/<name>.eml`` (RFC 5322 text); the demo's mailbox.

    The file name comes from the Message-ID, so sending the same outbox row
    twice leaves one file. Files are written to a temporary name and renamed,
    so a reader never sees half a message.
    """

    def __init__(self, folder: str | os.PathLike, sender: str = "bloomline@localhost"):
        self.folder = Path(folder)
        self.sender = sender

    def send(self, message: EmailMessage) -> str:
        self.folder.mkdir(parents=True, exist_ok=True)
        stem = re.sub(r"[^A-Za-z0-9._-]+", "_", message["Message-ID"].strip("<>").partition("@")[0])
        fd, tmp = tempfile.mkstemp(dir=self.folder, prefix=".tmp-", suffix=".eml")
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(message.as_bytes())
            os.replace(tmp, self.folder / f"{stem}.eml")
        except BaseException:
            if os.path.exists(tmp):
                os.unlink(tmp)
            raise
        return f"written {stem}.eml"


def smtp_tls_context(smtp_config) -> ssl.SSLContext:
    """A TLS context that checks the server's certificate and host name (the system's CAs, or ``ca_file``)."""
    ca = getattr(smtp_config, "ca_file", None)
    return ssl.create_default_context(cafile=str(ca) if ca else None)


class _SmtpSession:
    """One SMTP connection for a round of messages; reconnects after a failure."""

    def __init__(self, transport: SmtpTransport):
        self.transport = transport
        self.smtp: smtplib.SMTP | None = None

    def _connect(self) -> smtplib.SMTP:
        c = self.transport.config
        smtp = smtplib.SMTP(c.host, c.port, timeout=c.timeout_s)
        try:
            if c.starttls:
                smtp.starttls(context=self.transport.tls_context)
            if c.username:
                smtp.login(c.username, c.password or "")
        except BaseException:
            _close(smtp)
            raise
        return smtp

    def send(self, message: EmailMessage) -> str:
        if self.smtp is None:
            self.smtp = self._connect()
        try:
            refused = self.smtp.send_message(message)
        except BaseException:
            # drop the connection without QUIT: a server that did not answer will not answer QUIT either
            with contextlib.suppress(OSError):
                self.smtp.close()
            self.smtp = None
            raise
        if refused:  # some recipients refused: for a one-recipient message this does not happen
            raise smtplib.SMTPRecipientsRefused(refused)
        return "250 accepted"

    def close(self) -> None:
        if self.smtp is not None:
            _close(self.smtp)
            self.smtp = None


def _close(smtp: smtplib.SMTP) -> None:
    """QUIT, or just drop the connection when the server does not answer."""
    try:
        smtp.quit()
    except (smtplib.SMTPException, OSError):
        with contextlib.suppress(OSError):
            smtp.close()


class SmtpTransport:
    """Send through an SMTP server (``monitor.config.SmtpConfig``).

    Every socket operation is bounded by ``timeout_s``, so a server that
    accepts the connection but never answers costs one timeout, not a hung
    job. ``tls_context`` defaults to :func:`smtp_tls_context`.
    """

    def __init__(self, smtp_config, *, tls_context: ssl.SSLContext | None = None):
        self.config = smtp_config
        self.sender = smtp_config.sender
        self.tls_context = tls_context if tls_context is not None else smtp_tls_context(smtp_config)

    @contextlib.contextmanager
    def session(self) -> Iterator[_SmtpSession]:
        s = _SmtpSession(self)
        try:
            yield s
        finally:
            s.close()

    def send(self, message: EmailMessage) -> str:
        with self.session() as s:
            return s.send(message)


class WebhookRejected(Exception):
    """The receiver answered, but not with 2xx."""


class WebhookTransport:
    """POST each webhook row, signed for this attempt, to its subscriber's URL (``[[webhooks]]``)."""

    sender = "bloomline"

    def __init__(self, webhook_configs, *, session: requests.Session | None = None):
        self.webhooks = {h.name: h for h in webhook_configs}
        self.http = session

    def prepare(self, row, attempt: int) -> tuple:
        """(url, headers, body bytes, timeout [s]) of one attempt of an outbox row."""
        hook = self.webhooks.get(row.recipient)
        if hook is None:
            raise WebhookRejected(f"no webhook named {row.recipient!r} in the configuration")
        body = row.body.encode("utf-8")
        headers = hooks.signed_headers(hook.secret, row.message_key, row.subject, body, attempt=attempt)
        headers["User-Agent"] = USER_AGENT
        return hook.url, headers, body, hook.timeout_s

    @contextlib.contextmanager
    def session(self) -> Iterator[WebhookTransport]:
        owned = self.http is None
        if owned:
            self.http = requests.Session()
        try:
            yield self
        finally:
            if owned:
                self.http.close()
                self.http = None

    def send(self, request: tuple) -> str:
        url, headers, body, timeout_s = request
        http = self.http or requests
        resp = http.post(url, data=body, headers=headers, timeout=(timeout_s, timeout_s), allow_redirects=False)
        if not 200 <= resp.status_code < 300:
            raise WebhookRejected(f"HTTP {resp.status_code} from {url}")
        return f"HTTP {resp.status_code}"


def transport_from_config(config) -> Transport:
    """The mailbox transport when ``service.mailbox_dir`` is set, otherwise SMTP."""
    if config.service.mailbox_dir is not None:
        return MailboxTransport(config.service.mailbox_dir, sender=config.smtp.sender)
    return SmtpTransport(config.smtp)
