"""Shared fixtures. Mosquitto: a real broker on a free loopback port, started by the tests."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import time
from pathlib import Path

import pytest

MOSQUITTO = shutil.which("mosquitto") or (
    "/usr/sbin/mosquitto" if os.access("/usr/sbin/mosquitto", os.X_OK) else None
)


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def wait_for_port(port: int, timeout_s: float = 10.0) -> None:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.2):
                return
        except OSError:
            time.sleep(0.02)
    raise TimeoutError(f"nothing listens on 127.0.0.1:{port} after {timeout_s} s")


class Broker:
    """A Mosquitto process on 127.0.0.1:``port`` that can be stopped and started again.

    Persistence is on (in ``directory``), so sessions and queued QoS 1 messages survive a restart,
    as on a production broker.
    """

    def __init__(
        self,
        directory: Path,
        port: int | None = None,
        extra_config: str = "",
        allow_anonymous: bool = True,
    ):
        if MOSQUITTO is None:
            pytest.skip(
                "MOSQUITTO BROKER NOT FOUND: the MQTT tests are SKIPPED. "
                "Install it with `make test` (or `apt-get install mosquitto`)."
            )
        self.directory = directory
        directory.mkdir(parents=True, exist_ok=True)
        self.port = port or free_port()
        self.host = "127.0.0.1"
        self.config = directory / "mosquitto.conf"
        self.config.write_text(
            f"listener {self.port} 127.0.0.1\n"
            f"allow_anonymous {str(allow_anonymous).lower()}\n"
            "persistence true\n"
            f"persistence_location {directory}/\n"
            "autosave_interval 1\n"
            "max_queued_messages 1000000\n"
            "message_size_limit 0\n"
            f"log_dest file {directory}/mosquitto.log\n"
            # started as root, Mosquitto switches to user "mosquitto", who cannot write here
            + ("user root\n" if os.geteuid() == 0 else "")
            + "log_type error\nlog_type warning\nlog_type notice\n"
            + extra_config
        )
        self.process: subprocess.Popen | None = None

    def start(self) -> None:
        self.process = subprocess.Popen(
            [MOSQUITTO, "-c", str(self.config)],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        try:
            wait_for_port(self.port)
        except TimeoutError:
            self.stop()
            raise

    def stop(self) -> None:
        """Terminate (SIGTERM: Mosquitto saves its persistence file) and wait."""
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        self.process = None

    def restart(self) -> None:
        self.stop()
        self.start()

    @property
    def log(self) -> str:
        path = self.directory / "mosquitto.log"
        return path.read_text(errors="replace") if path.exists() else ""


@pytest.fixture(scope="session")
def mosquitto(tmp_path_factory):
    """One broker for the whole run; tests use their own topics and client ids."""
    broker = Broker(tmp_path_factory.mktemp("mosquitto"))
    broker.start()
    yield broker
    broker.stop()


@pytest.fixture
def mosquitto_restartable(tmp_path):
    """A broker of this test's own, which the test may stop and restart on the same port."""
    broker = Broker(tmp_path / "broker")
    broker.start()
    yield broker
    broker.stop()
