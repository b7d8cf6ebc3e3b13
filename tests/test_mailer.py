"""Tests of pipeline.mailer against a real SMTP server (aiosmtpd) on 127.0.0.1."""

from __future__ import annotations

import email
import socket
from email import policy
from pathlib import Path

import duckdb
import pytest
from aiosmtpd.controller import Controller

from pipeline.digest import write_digest
from pipeline.errors import InputError
from pipeline.mailer import send_digest
from pipeline.settings import SmtpSettings, Settings
from queue_fixture import fleet_copy


class _Inbox:
    def __init__(self):
        self.envelopes = []

    async def handle_DATA(self, server, session, envelope):
        self.envelopes.append(envelope)
        return "250 Message accepted for delivery"


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def smtp_server():
    inbox = _Inbox()
    controller = Controller(inbox, hostname="127.0.0.1", port=_free_port())
    controller.start()
    yield inbox, controller.port
    controller.stop()


@pytest.fixture(scope="module")
def digest_files(tmp_path_factory):
    path = fleet_copy(tmp_path_factory.mktemp("mail"))
    con = duckdb.connect(str(path), read_only=True)
    files = write_digest(con, Settings(), "2026-W27", tmp_path_factory.mktemp("out"))
    con.close()
    return files


def test_digest_is_delivered_as_text_and_html(smtp_server, digest_files):
    inbox, port = smtp_server
    smtp = SmtpSettings(host="127.0.0.1", port=port, sender="digest@fleet.invalid",
                        recipients=("coordinator@fleet.invalid", "admin@fleet.invalid"))
    accepted = send_digest(digest_files, smtp, timeout=10)
    assert accepted == ["coordinator@fleet.invalid", "admin@fleet.invalid"]
    assert len(inbox.envelopes) == 1
    env = inbox.envelopes[0]
    assert env.mail_from == "digest@fleet.invalid"
    assert sorted(env.rcpt_tos) == ["admin@fleet.invalid", "coordinator@fleet.invalid"]
    msg = email.message_from_bytes(env.content, policy=policy.default)
    assert msg["Subject"] == "breathfleet weekly digest 2026-W27 (2026-06-29 to 2026-07-05)"
    body = msg.get_body(preferencelist=("plain",)).get_content()
    html = msg.get_body(preferencelist=("html",)).get_content()
    # RFC 5322: lines travel with CRLF endings
    assert body.replace("\r\n", "\n") == digest_files.text.read_text()
    assert "data:image/png;base64," in html
    names = [part.get_filename() for part in msg.iter_attachments()]
    assert names == ["digest-2026-W27.md"]


def test_no_recipients_is_a_clear_error(digest_files):
    with pytest.raises(InputError, match="no recipients: set smtp.recipients"):
        send_digest(digest_files, SmtpSettings())


def test_unreachable_server_is_a_clear_error(digest_files):
    smtp = SmtpSettings(host="127.0.0.1", port=_free_port(), recipients=("a@fleet.invalid",))
    with pytest.raises(InputError, match="could not send the digest via 127.0.0.1"):
        send_digest(digest_files, smtp, timeout=5)


def test_digest_command_send(smtp_server, tmp_path):
    from click.testing import CliRunner
    from pipeline.cli import main
    inbox, port = smtp_server
    db = fleet_copy(tmp_path)
    settings = tmp_path / "program.toml"
    settings.write_text(f'[smtp]\nhost = "127.0.0.1"\nport = {port}\nrecipients = ["c@fleet.invalid"]\n')
    result = CliRunner().invoke(main, ["--settings", str(settings), "digest", "--db", str(db), "--week", "2026-W27",
                                       "--out", str(tmp_path / "out"), "--send"])
    assert result.exit_code == 0, result.output
    assert "sent to c@fleet.invalid" in result.output and len(inbox.envelopes) == 1
