"""How a finished email leaves Bloomline: a mailbox folder or an SMTP server.

:class:`MailboxTransport` writes one ``.eml`` file per message into a
folder (the demo's mailbox), :class:`SmtpTransport` talks to an SMTP server
with :mod:`smtplib`. Both raise on failure; retrying is the sender's job
(:func:`monitor.alerting.notify.send_due`).
"""

from __future__ import annotations

import os
import re
import smtplib
import tempfile
from email.message import EmailMessage
from pathlib import Path
from typing import Protocol


class Transport(Protocol):
    sender: str

    def send(self, message: EmailMessage) -> None:
        """Deliver one message or raise."""


class MailboxTransport:
    """Write each message as ``<folder>/<name>.eml`` (RFC 5322 text); the demo's mailbox.

    The file name comes from the Message-ID, so sending the same outbox row
    twice leaves one file. Files are written to a temporary name and renamed,
    so a reader never sees half a message.
    """

    def __init__(self, folder: str | os.PathLike, sender: str = "bloomline@localhost"):
        self.folder = Path(folder)
        self.sender = sender

    def send(self, message: EmailMessage) -> None:
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


class SmtpTransport:
    """Send through an SMTP server (``monitor.config.SmtpConfig``), one connection per message."""

    def __init__(self, smtp_config):
        self.config = smtp_config
        self.sender = smtp_config.sender

    def send(self, message: EmailMessage) -> None:
        c = self.config
        with smtplib.SMTP(c.host, c.port, timeout=c.timeout_s) as smtp:
            if c.starttls:
                smtp.starttls()
            if c.username:
                smtp.login(c.username, c.password or "")
            smtp.send_message(message)


def transport_from_config(config) -> Transport:
    """The mailbox transport when ``service.mailbox_dir`` is set, otherwise SMTP."""
    if config.service.mailbox_dir is not None:
        return MailboxTransport(config.service.mailbox_dir, sender=config.smtp.sender)
    return SmtpTransport(config.smtp)
