"""`rimewatch listen` at the command-line edge: bad input gives one clear line, no traceback."""

from __future__ import annotations

import click
import pytest
from click.testing import CliRunner

from rimewatch.cli import main
from rimewatch.commands.listen import parse_broker


@pytest.mark.parametrize(
    ("text", "tls", "expected"),
    [
        ("mqtt.example.net", False, ("mqtt.example.net", 1883)),  # IANA port for MQTT
        ("mqtt.example.net", True, ("mqtt.example.net", 8883)),  # IANA port for MQTT over TLS
        ("10.0.0.5:1884", False, ("10.0.0.5", 1884)),
        ("[::1]:8883", True, ("::1", 8883)),
        ("[::1]", False, ("::1", 1883)),
    ],
)
def test_parse_broker(text, tls, expected):
    assert parse_broker(text, tls) == expected


@pytest.mark.parametrize("text", ["host:port", "host:0", "host:70000"])
def test_parse_broker_rejects_bad_ports(text):
    with pytest.raises(click.BadParameter, match="port must be a number from 1 to 65535"):
        parse_broker(text, False)


def test_missing_site_file_is_one_clear_line(tmp_path):
    result = CliRunner().invoke(
        main, ["listen", str(tmp_path / "nope.yaml"), "--db", f"sqlite:///{tmp_path}/x.db"]
    )
    assert result.exit_code == 1
    assert "cannot read the site file" in result.output
    assert "Traceback" not in result.output


def test_bad_broker_port_is_a_usage_error(tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text(
        "site: {name: Harbour Road Bakery}\n"
        "units:\n"
        "  - {id: cr-1, name: Cold room, kind: cold_room_condensing_unit, refrigerant: R290,\n"
        "     expansion_device: txv, nominal_capacity_kW: 3,\n"
        "     points: [{role: box_temp, unit: degC, mqtt_topic: bakery/cr-1/box}]}\n"
    )
    result = CliRunner().invoke(
        main,
        ["listen", str(site), "--db", f"sqlite:///{tmp_path}/x.db", "--broker", "localhost:x"],
    )
    assert result.exit_code != 0
    assert "port must be a number" in result.output
    assert "Traceback" not in result.output
