"""Mail a written digest through SMTP (smtplib), as configured in SmtpSettings."""

from __future__ import annotations

import smtplib
from email.message import EmailMessage
from pathlib import Path

from pipeline.digest import DigestFiles
from pipeline.errors import InputError
from pipeline.settings import SmtpSettings


def build_message(files: DigestFiles, smtp: SmtpSettings) -> EmailMessage:
    """A multipart/alternative message: plain text first, then the HTML (charts embedded as data URIs),
    with the Markdown attached."""
    if not smtp.recipients:
        raise InputError("no recipients: set smtp.recipients in the settings file", field="smtp.recipients")
    msg = EmailMessage()
    msg["Subject"] = files.subject
    msg["From"] = smtp.sender
    msg["To"] = ", ".join(smtp.recipients)
    msg.set_content(files.text.read_text(encoding="utf-8"))
    msg.add_alternative(files.html.read_text(encoding="utf-8"), subtype="html")
    msg.add_attachment(files.markdown.read_bytes(), maintype="text", subtype="markdown",
                       filename=files.markdown.name)
    return msg


def send_digest(files: DigestFiles, smtp: SmtpSettings, *, timeout: float = 30.0) -> list[str]:
    """Send the digest to smtp.recipients; returns the recipients the server accepted.

    Raises:
        InputError: no recipients, unreadable password file, or the server refused or could not be reached.
    """
    msg = build_message(files, smtp)
    password = ""
    if smtp.username:
        if not smtp.password_file:
            raise InputError("smtp.username is set but smtp.password_file is not", field="smtp.password_file")
        try:
            password = Path(smtp.password_file).expanduser().read_text(encoding="utf-8").strip()
        except OSError as exc:
            raise InputError(f"cannot read SMTP password file: {exc.strerror}", file=smtp.password_file) from exc
    try:
        with smtplib.SMTP(smtp.host, smtp.port, timeout=timeout) as server:
            if smtp.starttls:
                server.starttls()
            if smtp.username:
                server.login(smtp.username, password)
            refused = server.send_message(msg)
    except (OSError, smtplib.SMTPException) as exc:
        raise InputError(f"could not send the digest via {smtp.host}:{smtp.port}: {exc}") from exc
    return [r for r in smtp.recipients if r not in refused]
