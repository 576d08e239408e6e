"""Payload decoding: formats, topic matching, SI conversion and every kind of rejection."""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime, timedelta, timezone

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rimewatch.ingest.payload import (
    ROLE_RANGES_SI,
    DecodeLimits,
    PayloadDecoder,
    PointTarget,
    TopicMap,
    affine_from,
    decoder_for_points,
    topic_matches,
)

# Received time for every message: 2025-06-01T12:00:00Z.
NOW = 1748779200000  # [ms]
assert datetime(2025, 6, 1, 12, tzinfo=UTC).timestamp() * 1000 == NOW

# NIST SP 811 (2008), appendix B: 1 psi = 6894.757 Pa; T/K = (t/degF + 459.67) / 1.8.
PSI_PA = 6894.757
STANDARD_ATMOSPHERE_PA = 101325.0  # ISO 2533 sea level
SUCTION = PointTarget.for_role(
    1, "rtu-1/suction_pressure", "suction_pressure", PSI_PA, STANDARD_ATMOSPHERE_PA
)
SUCTION_TEMP = PointTarget.for_role(2, "rtu-1/suction_temp", "suction_temp", 1 / 1.8, 459.67 / 1.8)
OUTDOOR = PointTarget.for_role(3, "rtu-1/outdoor_air_temp", "outdoor_air_temp", 1.0, 273.15)
STATUS = PointTarget.for_role(4, "rtu-1/compressor_status", "compressor_status", on_off=True)
ODD = PointTarget.for_role(5, "rtu-2/box_temp", "box_temp", 1.0, 273.15)
POINTS = [SUCTION, SUCTION_TEMP, OUTDOOR, STATUS, ODD]


def make_decoder(**limits) -> PayloadDecoder:
    topics = TopicMap(
        [
            ("acme/rtu-1/suction_pressure", SUCTION),
            ("acme/rtu-1/suction_temp", SUCTION_TEMP),
            ("acme/+/oat", OUTDOOR),
            ("acme/rtu-1/status/#", STATUS),
            ('acme/o\'brien; DROP TABLE readings;--/"box"', ODD),
        ]
    )
    return PayloadDecoder(topics, {p.name: p for p in POINTS}, DecodeLimits(**limits))


def decode(topic, payload, decoder=None):
    readings, rejects = [], []
    if isinstance(payload, str):
        payload = payload.encode()
    (decoder or make_decoder()).decode(topic, payload, NOW, readings, rejects)
    return readings, rejects


def test_plain_number_converted_to_si():
    readings, rejects = decode("acme/rtu-1/suction_pressure", "118")
    assert rejects == []
    # 118 psig -> 118 * 6894.757 + 101325 = 914906.3 Pa absolute (NIST SP 811 factor)
    ((key, ts, value),) = readings
    assert key == 1 and ts == NOW
    assert value == pytest.approx(914906.326, abs=1e-3)


def test_fahrenheit_to_kelvin():
    # 32 degF is the ice point 273.15 K; 212 degF the steam point 373.15 K (NIST SP 811)
    for text, kelvin in (("32", 273.15), ("212", 373.15)):
        readings, _ = decode("acme/rtu-1/suction_temp", text)
        assert readings[0][2] == pytest.approx(kelvin, abs=1e-9)


def test_json_object_with_iso_and_epoch_timestamps():
    expected = NOW - 30_000
    # RFC 3339 / ISO 8601 forms of the same instant: Z, numeric offset, epoch s, epoch ms
    stamps = [
        '"2025-06-01T11:59:30Z"',
        '"2025-06-01T13:59:30+02:00"',
        str(expected // 1000),
        str(expected),
        str(expected / 1000),
    ]
    for stamp in stamps:
        for key in ("ts", "timestamp"):
            readings, rejects = decode("acme/rtu-1/oat", f'{{"value": 21.5, "{key}": {stamp}}}')
            assert rejects == []
            assert readings == [(3, expected, pytest.approx(294.65))]


def test_naive_iso_timestamp_uses_configured_zone():
    decoder = make_decoder()
    decoder.naive_tz = timezone(timedelta(hours=-5))
    readings, _ = decode("acme/rtu-1/oat", '{"value": 1, "ts": "2025-06-01T06:00:00"}', decoder)
    assert readings[0][1] == NOW - 3_600_000


def test_missing_timestamp_takes_received_time():
    readings, _ = decode("acme/rtu-1/oat", '{"value": -3}')
    assert readings == [(3, NOW, pytest.approx(270.15))]


def test_batch_list_and_readings_object():
    items = [
        {"point": "rtu-1/outdoor_air_temp", "value": 20, "ts": NOW - 60_000},
        {"topic": "acme/rtu-1/suction_pressure", "value": 0, "ts": NOW - 60_000},
        {"point": "rtu-1/compressor_status", "value": "on", "ts": NOW - 60_000},
        {"point": "rtu-1/compressor_status", "value": False, "ts": NOW - 30_000},
    ]
    expected = [
        (3, NOW - 60_000, pytest.approx(293.15)),
        (1, NOW - 60_000, pytest.approx(STANDARD_ATMOSPHERE_PA)),
        (4, NOW - 60_000, 1.0),
        (4, NOW - 30_000, 0.0),
    ]
    for doc in (items, {"readings": items}):
        readings, rejects = decode("acme/batch", json.dumps(doc))
        assert rejects == []
        assert readings == expected


def test_batch_on_point_topic_items_inherit_the_topic():
    doc = [{"value": 10, "ts": NOW - 20_000}, {"value": 11, "ts": NOW - 10_000}]
    readings, _ = decode("acme/rtu-7/oat", json.dumps(doc))
    assert [r[2] for r in readings] == [pytest.approx(283.15), pytest.approx(284.15)]


def test_batch_keeps_good_items_and_rejects_bad_ones_individually():
    doc = [
        {"point": "rtu-1/outdoor_air_temp", "value": 20},
        {"point": "rtu-1/outdoor_air_temp", "value": "warm"},
        7,
        {"point": "nope/none", "value": 1},
        {"point": "rtu-1/outdoor_air_temp", "value": 21},
    ]
    readings, rejects = decode("acme/batch", json.dumps(doc))
    assert [r[2] for r in readings] == [pytest.approx(293.15), pytest.approx(294.15)]
    assert [r.reason.split(":")[0] for r in rejects] == [
        "batch item 1",
        "batch item 2",
        "batch item 3",
    ]
    assert "must be a number, got a string" in rejects[0].reason
    assert json.loads(rejects[0].payload) == doc[1]


@pytest.mark.parametrize(
    ("topic", "payload", "reason"),
    [
        ("acme/rtu-1/oat", "{not json", "invalid JSON"),
        ("acme/rtu-1/oat", "hello", "is not a number"),
        ("acme/rtu-1/oat", "NaN", "is not a number"),
        ("acme/rtu-1/oat", "1_000", "is not a number"),
        ("acme/rtu-1/oat", '{"value": NaN}', "not a finite number"),
        ("acme/rtu-1/oat", '{"value": Infinity}', "not a finite number"),
        ("acme/rtu-1/oat", '{"value": -Infinity}', "not a finite number"),
        ("acme/rtu-1/oat", "1e400", "not a finite number"),
        ("acme/rtu-1/oat", "1e300", "implausibly large"),
        ("acme/rtu-1/oat", '{"value": 1' + "0" * 400 + "}", "too large"),
        ("acme/rtu-1/oat", '{"value": "21"}', "got a string"),
        ("acme/rtu-1/oat", '{"value": true}', "got a boolean"),
        ("acme/rtu-1/oat", '{"value": null}', "got null"),
        ("acme/rtu-1/oat", '{"value": [1]}', "got a list"),
        ("acme/rtu-1/oat", '{"val": 1}', "no 'value'"),
        ("acme/rtu-1/oat", '{"readings": 5}', "must be a list"),
        ("acme/rtu-1/oat", "[]", "empty batch"),
        ("acme/rtu-1/oat", b"\xff\xfe", "not UTF-8"),
        # -80 degC outdoor air is below the plausible -70 degC (common practice limit)
        ("acme/rtu-1/oat", "-80", "outside the plausible range"),
        ("acme/rtu-1/suction_pressure", "-20", "outside the plausible range"),
        ("acme/rtu-1/status/c1", "2", "outside the plausible range"),
        ("acme/rtu-1/oat", '{"value": 1, "ts": "yesterday"}', "not ISO 8601"),
        ("acme/rtu-1/oat", '{"value": 1, "ts": true}', "got a boolean"),
        ("acme/rtu-1/oat", '{"value": 1, "ts": 1e400}', "not a finite epoch time"),
        ("acme/rtu-1/oat", '{"value": 1, "ts": "2025-06-01T13:00:00Z"}', "3600 s in the future"),
        ("acme/rtu-1/oat", '{"value": 1, "ts": "2020-01-01T00:00:00Z"}', "older than the limit"),
        ("acme/unknown", "1", "matches no point"),
        ("acme/rtu-1/suction_pressure/extra", "1", "matches no point"),
        ("acme/unknown", '{"value": 1}', "matches no point"),
    ],
)
def test_rejections_carry_a_reason(topic, payload, reason):
    readings, rejects = decode(topic, payload)
    assert readings == []
    assert len(rejects) == 1
    assert reason in rejects[0].reason
    assert rejects[0].topic == topic
    assert rejects[0].received_ms == NOW


def test_oversize_payload_rejected_and_truncated():
    decoder = make_decoder(max_payload_bytes=100)
    _, rejects = decode("acme/rtu-1/oat", " " * 99 + "1", decoder)
    assert rejects == []
    _, rejects = decode("acme/rtu-1/oat", " " * 5000 + "1", decoder)
    assert "5001 bytes exceeds the limit of 100 bytes" in rejects[0].reason
    assert len(rejects[0].payload) == 1024


def test_on_off_point_accepts_words_and_numbers():
    values = [decode("acme/rtu-1/status/c1", text)[0][0][2] for text in ("ON", "off", "1", "0")]
    assert values == [1.0, 0.0, 1.0, 0.0]
    # words are not numbers on a numeric point
    assert decode("acme/rtu-1/oat", "on")[1][0].reason == "payload 'on' is not a number"


def test_sql_significant_characters_are_plain_text():
    topic = 'acme/o\'brien; DROP TABLE readings;--/"box"'
    readings, rejects = decode(topic, "-18")
    assert rejects == [] and readings == [(5, NOW, pytest.approx(255.15))]


# MQTT 5.0 (OASIS, 2019) section 4.7.1: wildcard examples
@pytest.mark.parametrize(
    ("pattern", "topic", "expected"),
    [
        ("sport/tennis/player1/#", "sport/tennis/player1", True),
        ("sport/tennis/player1/#", "sport/tennis/player1/ranking", True),
        ("sport/tennis/player1/#", "sport/tennis/player1/score/wimbledon", True),
        ("sport/#", "sport", True),
        ("#", "anything/at/all", True),
        ("sport/tennis/+", "sport/tennis/player1", True),
        ("sport/tennis/+", "sport/tennis/player1/ranking", False),
        ("sport/+", "sport", False),
        ("sport/+", "sport/", True),
        ("+/+", "/finance", True),
        ("/+", "/finance", True),
        ("+", "/finance", False),
        ("#", "$SYS/broker/load", False),  # section 4.7.2
        ("+/monitor/Clients", "$SYS/monitor/Clients", False),
        ("$SYS/#", "$SYS/broker/load", True),
    ],
)
def test_topic_matches_mqtt_spec_examples(pattern, topic, expected):
    assert topic_matches(pattern, topic) is expected


@pytest.mark.parametrize("pattern", ["sport/tennis#", "sport/#/ranking", "sport+", "a/b+/c"])
def test_invalid_filters_refused(pattern):
    # MQTT 5.0 section 4.7.1.2/4.7.1.3: wildcards must occupy an entire level, '#' last
    with pytest.raises(ValueError, match=r"whole level|last level"):
        TopicMap([(pattern, OUTDOOR)])


def test_overlapping_wildcards_are_reported_not_guessed():
    topics = TopicMap([("plant/+/t", OUTDOOR), ("plant/a/#", ODD), ("plant/a/t", SUCTION)])
    assert topics.lookup("plant/a/t") is SUCTION  # an exact topic wins
    assert topics.lookup("plant/b/t") is OUTDOOR
    assert topics.lookup("plant/a/x/t") is ODD
    assert "several points" in TopicMap([("p/+", OUTDOOR), ("p/#", ODD)]).lookup("p/q")


def test_duplicate_exact_topic_refused():
    with pytest.raises(ValueError, match="two points"):
        TopicMap([("a/b", OUTDOOR), ("a/b", ODD)])


def test_affine_from_recovers_scale_and_offset():
    # degF -> K (NIST SP 811): scale 1/1.8, offset 459.67/1.8
    def fahrenheit_to_kelvin(value, unit):
        assert unit == "degF"
        return (value + 459.67) / 1.8

    scale, offset = affine_from(lambda v: fahrenheit_to_kelvin(v, "degF"), "degF")
    assert scale == pytest.approx(1 / 1.8) and offset == pytest.approx(255.372222, abs=1e-6)
    with pytest.raises(ValueError, match="affinely"):
        affine_from(lambda v: v * v, "squared")


def test_ms_threshold_boundary():
    # epoch numbers >= 1e11 are milliseconds: 1e11 ms = 1973-03-03, 1e11 s would be year 5138
    decoder = make_decoder(max_age_s=math.inf, max_future_s=math.inf)
    readings, _ = decode("acme/rtu-1/oat", '{"value": 1, "ts": 100000000000}', decoder)
    assert readings[0][1] == 100_000_000_000


def test_decoder_for_points_uses_units_and_site_elevation():
    from rimewatch.store import PointInfo

    def info(point_id, role, unit, topic, elevation_m=1000.0):
        return PointInfo(point_id, "acme", 1, "rtu-1", 1, role, unit, topic, None, elevation_m)

    decoder = decoder_for_points(
        [
            info(11, "suction_pressure", "psig", "a/p"),
            info(12, "suction_temp", "degF", "a/t"),
            info(13, "compressor_status", "on/off", "a/s"),
            info(14, "outdoor_air_temp", "degC", None),
        ]
    )
    readings, rejects = [], []
    decoder.decode("a/p", b"0", NOW, readings, rejects)
    decoder.decode("a/t", b"32", NOW, readings, rejects)
    decoder.decode("a/s", b"on", NOW, readings, rejects)
    decoder.decode(
        "a/batch", b'[{"point": "rtu-1/outdoor_air_temp", "value": 0}]', NOW, readings, rejects
    )
    assert rejects == []
    # 0 psig at 1000 m is the ISO 2533 standard-atmosphere pressure there, 89874.6 Pa
    assert readings[0] == (11, NOW, pytest.approx(89874.6, abs=1.0))
    assert readings[1] == (12, NOW, pytest.approx(273.15))  # 32 degF, NIST SP 811
    assert readings[2] == (13, NOW, 1.0)
    assert readings[3] == (14, NOW, pytest.approx(273.15))


def test_decoder_for_points_names_a_bad_unit():
    from rimewatch.store import PointInfo

    bad = PointInfo(1, "acme", 1, "rtu-1", 1, "suction_pressure", "furlongs", "a/p", None, 0.0)
    with pytest.raises(ValueError, match="point rtu-1/suction_pressure"):
        decoder_for_points([bad])


def test_every_role_has_a_plausible_range():
    from rimewatch.site import ROLES

    assert set(ROLES) <= set(ROLE_RANGES_SI)
    for low, high in ROLE_RANGES_SI.values():
        assert low < high


json_scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=20),
)
json_items = st.dictionaries(
    st.sampled_from(["value", "ts", "timestamp", "point", "topic", "other"]),
    json_scalars,
    max_size=5,
)


@settings(max_examples=200, deadline=None)
@given(payload=st.binary(max_size=300), topic=st.sampled_from(["acme/rtu-1/oat", "acme/x", "a/b"]))
def test_arbitrary_bytes_never_raise_and_never_vanish(payload, topic):
    readings, rejects = decode(topic, payload)
    # every message becomes at least one reading or one rejection: nothing is silently dropped
    assert readings or rejects
    assert all(r.reason for r in rejects)


@settings(max_examples=200, deadline=None)
@given(items=st.lists(json_items, min_size=1, max_size=8))
def test_every_batch_item_is_stored_or_quarantined(items):
    readings, rejects = decode("acme/rtu-1/oat", json.dumps(items))
    assert len(readings) + len(rejects) == len(items)
    for _, ts_ms, value in readings:
        assert type(ts_ms) is int and math.isfinite(value)


def test_untimed_readings_of_a_backlog_stay_distinct():
    # A backlog drained within one millisecond: each plain number keeps its own instant, 1 ms apart,
    # so the store's (point, time) key does not merge them; other points are independent.
    decoder = make_decoder()
    readings, rejects = [], []
    for text in (b"1", b"2", b"3"):
        decoder.decode("acme/rtu-1/oat", text, NOW, readings, rejects)
    decoder.decode("acme/rtu-1/suction_temp", b"40", NOW, readings, rejects)
    decoder.decode("acme/rtu-1/oat", b'{"value": 4}', NOW, readings, rejects)
    decoder.decode("acme/rtu-1/oat", b"5", NOW + 10, readings, rejects)
    assert [(key, ts) for key, ts, _ in readings] == [
        (3, NOW),
        (3, NOW + 1),
        (3, NOW + 2),
        (2, NOW),
        (3, NOW + 3),
        (3, NOW + 10),
    ]
