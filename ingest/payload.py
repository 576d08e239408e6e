"""Decode MQTT payloads into SI readings, or into rejections with a reason a person can read.

Allocation-light, this is the ingest hot path, and free of I/O: nothing here touches the network,
the database or the clock; the caller passes the time a message was received.

Accepted payloads (the topic names the point unless an item says otherwise):

- a plain number: ``12.5``, ``-3``, ``1.2e5`` (``on``/``off`` for on/off points), timed when
  received (1 ms apart at least per point);
- a JSON object: ``{"value": 12.5, "ts": "2025-06-01T12:00:00Z"}`` (``ts`` or ``timestamp``,
  optional: ISO 8601, or epoch seconds, or epoch milliseconds when >= 1e11);
- a JSON batch: a list of such objects, or ``{"readings": [...]}``; each item may name its point
  with ``"point": "<unit id>/<role>"`` or ``"topic": "<full topic>"`` and otherwise belongs to the
  message's topic.

A reading is ``(point, ts_ms, value)``: the point's key as given in :class:`PointTarget`, UTC epoch
milliseconds as int (the store's time format), and the value in SI (the point's unit converted with
``value * scale + offset``).
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from datetime import UTC, datetime, tzinfo
from typing import Any

from rimewatch.ingest.units import atmospheric_pressure, to_si, unit_kind

# Plausible ranges in SI per role, [K], [Pa] absolute, [W], [A]. Generous on purpose: they catch
# garbage (a sensor fault code, a unit mix-up by 1000), not plant faults. Common practice.
_REFRIGERANT_TEMP_K = (173.15, 423.15)  # -100 .. 150 degC
_AIR_TEMP_K = (203.15, 373.15)  # -70 .. 100 degC
_WATER_TEMP_K = (243.15, 373.15)  # -30 .. 100 degC (brines below 0 degC)
_PRESSURE_PA = (0.0, 2.0e7)  # 0 .. 200 bar absolute (R744 transcritical reaches ~140 bar)
ROLE_RANGES_SI: dict[str, tuple[float, float]] = {
    "suction_pressure": _PRESSURE_PA,
    "discharge_pressure": _PRESSURE_PA,
    "liquid_pressure": _PRESSURE_PA,
    "suction_temp": _REFRIGERANT_TEMP_K,
    "liquid_temp": _REFRIGERANT_TEMP_K,
    "evaporator_outlet_temp": _REFRIGERANT_TEMP_K,
    "discharge_temp": (173.15, 473.15),  # up to 200 degC
    "outdoor_air_temp": _AIR_TEMP_K,
    "condenser_leaving_air_temp": _AIR_TEMP_K,
    "return_air_temp": _AIR_TEMP_K,
    "supply_air_temp": _AIR_TEMP_K,
    "box_temp": _AIR_TEMP_K,
    "chilled_water_supply_temp": _WATER_TEMP_K,
    "chilled_water_return_temp": _WATER_TEMP_K,
    "condenser_water_supply_temp": _WATER_TEMP_K,
    "condenser_water_return_temp": _WATER_TEMP_K,
    "compressor_power": (0.0, 1.0e7),  # 10 MW
    "compressor_current": (0.0, 1.0e4),
    "compressor_status": (0.0, 1.0),
    "fan_status": (0.0, 1.0),
    "return_air_humidity": (0.0, 1.05),  # fraction; sensors overshoot 100 %RH near saturation
    "compressor_speed": (0.0, 1500.0),  # [Hz] (90 000 rpm), or a 0-1 fraction of full speed
    "chilled_water_flow": (0.0, 1.0e4),  # [kg/s] or [m^3/s]
    "condenser_water_flow": (0.0, 1.0e4),
}
# Any value beyond this magnitude is garbage whatever the role.
MAX_ABS_VALUE = 1.0e12

_NUMBER = re.compile(r"\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*")
_ON_OFF = {"on": 1.0, "off": 0.0, "true": 1.0, "false": 0.0}
_EPOCH_MS_THRESHOLD = 1.0e11  # epoch numbers >= this are milliseconds (1e11 s is year 5138)
_TS_KEYS = ("ts", "timestamp")


@dataclass(frozen=True, slots=True)
class PointTarget:
    """Where readings for one point go and how to turn its raw numbers into SI.

    Parameters
    ----------
    key : Any
        The point's identity in the readings written (e.g. the store's point id).
    name : str
        ``"<unit id>/<role>"``: how people and batch items refer to the point.
    role : str
        Point role (design.md); selects the plausible range.
    scale, offset : float
        ``value_si = raw * scale + offset`` (affine units: degF, psig, kW, ...).
    on_off : bool
        The point is on/off: accepts ``on``/``off`` and JSON true/false, stores 1.0/0.0.
    """

    key: Any
    name: str
    role: str
    scale: float = 1.0
    offset: float = 0.0
    on_off: bool = False
    low: float = field(default=-MAX_ABS_VALUE)
    high: float = field(default=MAX_ABS_VALUE)

    @classmethod
    def for_role(cls, key, name, role, scale=1.0, offset=0.0, on_off=False) -> PointTarget:
        """Build a target with the plausible SI range of ``role`` (open range if unknown)."""
        low, high = ROLE_RANGES_SI.get(role, (-MAX_ABS_VALUE, MAX_ABS_VALUE))
        return cls(key, name, role, float(scale), float(offset), on_off, low, high)


def affine_from(convert: Callable[[float], float], unit: str) -> tuple[float, float]:
    """``(scale, offset)`` of a unit conversion ``convert(value) -> SI``, checked to be affine.

    The conversion is sampled at 0, 1 and 1000; ``unit`` only names it in the error.
    """
    zero = float(convert(0.0))
    scale = float(convert(1.0)) - zero
    check = float(convert(1000.0))
    if not math.isclose(check, zero + 1000.0 * scale, rel_tol=1e-9, abs_tol=1e-9):
        raise ValueError(f"unit {unit!r} does not convert to SI affinely; cannot precompute it")
    return scale, zero


def _validate_filter(pattern: str) -> None:
    levels = pattern.split("/")
    for i, level in enumerate(levels):
        if ("+" in level and level != "+") or ("#" in level and level != "#"):
            raise ValueError(f"MQTT topic {pattern!r}: '+' and '#' must fill a whole level")
        if level == "#" and i != len(levels) - 1:
            raise ValueError(f"MQTT topic {pattern!r}: '#' is only allowed as the last level")


def topic_matches(pattern: str, topic: str) -> bool:
    """MQTT filter matching: ``+`` is one level, a final ``#`` is any number of levels (or none).

    As in MQTT, wildcards at the first level do not match topics starting with ``$``.
    """
    if topic.startswith("$") and pattern[:1] in ("+", "#"):
        return False
    p_levels = pattern.split("/")
    t_levels = topic.split("/")
    for i, p in enumerate(p_levels):
        if p == "#":
            return True
        if i >= len(t_levels):
            return False
        if p != "+" and p != t_levels[i]:
            return False
    return len(p_levels) == len(t_levels)


class TopicMap:
    """Topic -> point lookup: exact topics by dict, wildcard filters in order, results cached."""

    _CACHE_LIMIT = 65536

    def __init__(self, entries: Iterable[tuple[str, PointTarget]]):
        self.exact: dict[str, PointTarget] = {}
        self.patterns: list[tuple[str, PointTarget]] = []
        for pattern, target in entries:
            _validate_filter(pattern)
            if "+" in pattern or "#" in pattern:
                self.patterns.append((pattern, target))
            elif pattern in self.exact:
                raise ValueError(
                    f"MQTT topic {pattern!r} is given to two points: "
                    f"{self.exact[pattern].name} and {target.name}"
                )
            else:
                self.exact[pattern] = target
        self._cache: dict[str, PointTarget | str] = {}

    @property
    def filters(self) -> list[str]:
        """Every distinct topic filter, for subscribing."""
        return list(self.exact) + list(dict.fromkeys(p for p, _ in self.patterns))

    def lookup(self, topic: str) -> PointTarget | str:
        """The point for ``topic``, or a rejection reason (str)."""
        target = self.exact.get(topic)
        if target is not None:
            return target
        found = self._cache.get(topic)
        if found is None:
            found = self._match(topic)
            if len(self._cache) >= self._CACHE_LIMIT:
                self._cache.clear()
            self._cache[topic] = found
        return found

    def _match(self, topic: str) -> PointTarget | str:
        hits = [t for p, t in self.patterns if topic_matches(p, topic)]
        if not hits:
            return f"topic {topic!r} matches no point in the site file"
        if len(hits) > 1:
            names = ", ".join(t.name for t in hits)
            return f"topic {topic!r} matches several points ({names}): make the patterns disjoint"
        return hits[0]


@dataclass(frozen=True, slots=True)
class Rejection:
    """One payload (or batch item) that could not become a reading."""

    topic: str
    payload: bytes
    reason: str
    received_ms: int


@dataclass
class DecodeLimits:
    """Validation limits; times in seconds."""

    max_payload_bytes: int = 256 * 1024
    max_future_s: float = 300.0
    max_age_s: float = 366 * 86400.0
    max_batch_items: int = 100_000


class PayloadDecoder:
    """Turns ``(topic, payload bytes)`` into readings and rejections.

    Parameters
    ----------
    topics : TopicMap
        Topic patterns of the site's points.
    points_by_name : dict
        ``"<unit id>/<role>"`` -> target, for batch items that name their point.
    limits : DecodeLimits
    naive_tz : tzinfo
        Zone for ISO 8601 timestamps without an offset (default UTC).
    """

    def __init__(
        self,
        topics: TopicMap,
        points_by_name: dict[str, PointTarget] | None = None,
        limits: DecodeLimits | None = None,
        naive_tz: tzinfo = UTC,
    ):
        self.topics = topics
        self.points_by_name = points_by_name or {}
        self.limits = limits or DecodeLimits()
        self.naive_tz = naive_tz
        self._last_untimed_ms: dict[Any, int] = {}

    def _untimed_ms(self, target: PointTarget, received_ms: int) -> int:
        """Time for a reading without a timestamp: when it was received, but at least 1 ms after the
        point's previous untimed reading, so a drained backlog does not collapse into one instant
        (which the store would keep only once)."""
        last = self._last_untimed_ms.get(target.key, -1)
        ts_ms = received_ms if received_ms > last else last + 1
        self._last_untimed_ms[target.key] = ts_ms
        return ts_ms

    def decode(
        self,
        topic: str,
        payload: bytes,
        received_ms: int,
        readings: list[tuple[Any, int, float]],
        rejects: list[Rejection],
    ) -> None:
        """Append the message's readings to ``readings`` and its problems to ``rejects``."""
        limits = self.limits
        if len(payload) > limits.max_payload_bytes:
            rejects.append(
                Rejection(
                    topic,
                    payload[:1024],
                    f"payload of {len(payload)} bytes exceeds the limit of "
                    f"{limits.max_payload_bytes} bytes (first 1024 bytes kept)",
                    received_ms,
                )
            )
            return
        try:
            text = payload.decode()
        except UnicodeDecodeError as exc:
            rejects.append(
                Rejection(topic, payload, f"payload is not UTF-8 text: {exc}", received_ms)
            )
            return
        first = text.lstrip()[:1]
        if first not in ("{", "["):
            self._decode_plain(topic, payload, text, received_ms, readings, rejects)
            return
        try:
            doc = json.loads(text)
        except (ValueError, RecursionError) as exc:
            rejects.append(Rejection(topic, payload, f"invalid JSON: {exc}", received_ms))
            return
        if type(doc) is dict and "readings" in doc:
            doc = doc["readings"]
            if type(doc) is not list:
                reason = f"'readings' must be a list, got {_json_type(doc)}"
                rejects.append(Rejection(topic, payload, reason, received_ms))
                return
        if type(doc) is dict:
            reason = self._decode_item(topic, doc, received_ms, readings)
            if reason is not None:
                rejects.append(Rejection(topic, payload, reason, received_ms))
            return
        if len(doc) > limits.max_batch_items:
            reason = f"batch of {len(doc)} items exceeds the limit of {limits.max_batch_items}"
            rejects.append(Rejection(topic, payload[:1024], reason, received_ms))
            return
        if not doc:
            rejects.append(Rejection(topic, payload, "empty batch", received_ms))
            return
        decode_item = self._decode_item
        for index, item in enumerate(doc):
            if type(item) is not dict:
                reason = f"batch item {index}: expected an object, got {_json_type(item)}"
            else:
                reason = decode_item(topic, item, received_ms, readings)
                if reason is None:
                    continue
                reason = f"batch item {index}: {reason}"
            raw = json.dumps(item, allow_nan=True).encode()
            rejects.append(Rejection(topic, raw, reason, received_ms))

    def _decode_plain(self, topic, payload, text, received_ms, readings, rejects) -> None:
        target = self.topics.lookup(topic)
        if type(target) is str:
            rejects.append(Rejection(topic, payload, target, received_ms))
            return
        if _NUMBER.fullmatch(text):
            raw = float(text)
        elif target.on_off and text.strip().lower() in _ON_OFF:
            raw = _ON_OFF[text.strip().lower()]
        else:
            shown = text if len(text) <= 40 else text[:40] + "..."
            reason = f"payload {shown!r} is not a number"
            rejects.append(Rejection(topic, payload, reason, received_ms))
            return
        reason = _append_reading(target, self._untimed_ms(target, received_ms), raw, readings)
        if reason is not None:
            rejects.append(Rejection(topic, payload, reason, received_ms))

    def _decode_item(self, topic, item: dict, received_ms: float, readings) -> str | None:
        """Decode one JSON object; returns a reason when it is rejected."""
        name = item.get("point")
        if name is not None:
            target = self.points_by_name.get(name) if type(name) is str else None
            if target is None:
                return f"point {name!r} is not in the site file (expected '<unit id>/<role>')"
        else:
            item_topic = item.get("topic", topic)
            if type(item_topic) is not str:
                return f"'topic' must be a string, got {_json_type(item_topic)}"
            target = self.topics.lookup(item_topic)
            if type(target) is str:
                return target
        if "value" not in item:
            return "object has no 'value'"
        value = item["value"]
        value_type = type(value)
        if value_type is float or value_type is int:
            raw = value
        elif target.on_off and (
            value_type is bool or (value_type is str and value.lower() in _ON_OFF)
        ):
            raw = float(value) if value_type is bool else _ON_OFF[value.lower()]
        else:
            return f"'value' must be a number, got {_json_type(value)}"

        ts = item.get("ts")
        if ts is None:
            ts = item.get("timestamp")
        if ts is None:
            ts_ms = self._untimed_ms(target, received_ms)
        else:
            ts_ms = self._timestamp_ms(ts)
            if type(ts_ms) is str:
                return ts_ms
            limits = self.limits
            if ts_ms > received_ms + limits.max_future_s * 1000.0:
                ahead_s = (ts_ms - received_ms) / 1000.0
                return f"timestamp {_iso(ts_ms)} is {ahead_s:.0f} s in the future"
            if ts_ms < received_ms - limits.max_age_s * 1000.0:
                return (
                    f"timestamp {_iso(ts_ms)} is older than the limit of "
                    f"{limits.max_age_s / 86400:.0f} days"
                )
        return _append_reading(target, ts_ms, raw, readings)

    def _timestamp_ms(self, ts) -> int | str:
        ts_type = type(ts)
        if ts_type is int or ts_type is float:
            try:
                ts_ms = ts if abs(ts) >= _EPOCH_MS_THRESHOLD else ts * 1000.0
                return round(ts_ms)
            except (OverflowError, ValueError):
                return f"timestamp {str(ts)[:30]} is not a finite epoch time"
        if ts_type is str:
            try:
                parsed = datetime.fromisoformat(ts)
            except ValueError:
                return f"timestamp {ts[:40]!r} is not ISO 8601"
            if parsed.tzinfo is None:
                parsed = parsed.replace(tzinfo=self.naive_tz)
            return round(parsed.timestamp() * 1000.0)
        return f"timestamp must be ISO 8601 text or epoch seconds, got {_json_type(ts)}"


def _append_reading(target: PointTarget, ts_ms: int, raw, readings) -> str | None:
    try:
        value = raw * target.scale + target.offset
    except OverflowError:  # a JSON integer beyond float range
        return f"value {str(raw)[:30]}... is too large"
    if not math.isfinite(value):
        return f"value {raw!r} is not a finite number"
    if not target.low <= value <= target.high:
        if abs(value) > MAX_ABS_VALUE:
            return f"value {raw!r} is implausibly large"
        return (
            f"{target.role} {value:.6g} (SI) is outside the plausible range "
            f"{target.low:.6g} to {target.high:.6g}"
        )
    readings.append((target.key, ts_ms, value))
    return None


def _iso(ts_ms: int) -> str:
    try:
        return datetime.fromtimestamp(ts_ms / 1000.0, UTC).isoformat()
    except (OverflowError, ValueError, OSError):
        return f"{ts_ms} (epoch ms)"


def _json_type(value) -> str:
    if value is None:
        return "null"
    return {bool: "a boolean", str: "a string", list: "a list", dict: "an object"}.get(
        type(value), type(value).__name__
    )


def decoder_for_points(
    points: Iterable, limits: DecodeLimits | None = None, naive_tz: tzinfo = UTC
) -> PayloadDecoder:
    """A decoder for a site's points.

    Parameters
    ----------
    points : iterable of :class:`rimewatch.store.PointInfo` (or anything with ``id``, ``unit_key``,
        ``role``, ``measurement_unit``, ``mqtt_topic`` and ``elevation_m``). Readings carry ``id``.
    """
    entries, by_name = [], {}
    for point in points:
        name = f"{point.unit_key}/{point.role}"
        try:
            if unit_kind(point.measurement_unit) == "status":
                target = PointTarget.for_role(point.id, name, point.role, on_off=True)
            else:
                pressure = atmospheric_pressure(point.elevation_m or 0.0)
                scale, offset = affine_from(
                    lambda v, u=point.measurement_unit, p=pressure: to_si(v, u, p),
                    point.measurement_unit,
                )
                target = PointTarget.for_role(point.id, name, point.role, scale, offset)
        except ValueError as exc:
            raise ValueError(f"point {name}: {exc}") from exc
        by_name[name] = target
        if point.mqtt_topic:
            entries.append((point.mqtt_topic, target))
    return PayloadDecoder(TopicMap(entries), by_name, limits, naive_tz)
