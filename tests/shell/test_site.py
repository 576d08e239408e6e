"""The site file: validation messages, the `init` example, and applying it to the database."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import yaml
from sqlalchemy import select

from rimewatch.site import SiteConfigError, load_site, parse_site, safety_notes
from rimewatch.site_sync import apply_site
from rimewatch.store import active_points, connect
from rimewatch.store.schema import Point, Unit

pytest_plugins = ["db_backends"]

EXAMPLE = Path(__file__).parents[2] / "rimewatch" / "example_site.yaml"


def minimal_site(**unit_changes) -> dict:
    unit = {
        "id": "rtu-1",
        "name": "RTU 1",
        "kind": "rooftop_unit",
        "refrigerant": "R410A",
        "expansion_device": "txv",
        "nominal_capacity_kW": 35,
        "points": [
            {"role": "suction_pressure", "unit": "psig", "mqtt_topic": "s/rtu-1/ps"},
            {"role": "suction_temp", "unit": "degF", "csv_column": "Suction T"},
        ],
    }
    unit.update(unit_changes)
    return {"site": {"name": "Test", "timezone": "Europe/Vienna"}, "units": [unit]}


def write(tmp_path, document) -> Path:
    path = tmp_path / "site.yaml"
    path.write_text(yaml.safe_dump(document, sort_keys=False))
    return path


def test_example_validates_and_has_three_kinds_and_cautions():
    config = load_site(EXAMPLE)
    assert {u.kind for u in config.units} == {
        "rooftop_unit",
        "cold_room_condensing_unit",
        "split_system",
    }
    assert {u.refrigerant for u in config.units} == {"R410A", "R744", "R290"}
    notes = " ".join(safety_notes(config))
    # ASHRAE 34: R290 is A3 (flammable); R744 is A1 but runs at very high pressure.
    assert "R290 is flammable" in notes and "A3" in notes
    assert "R744" in notes and "licensed" in notes
    assert config.unit("rtu-1").point("suction_pressure").unit == "psig"


@pytest.mark.parametrize(
    ("change", "field_path", "what"),
    [
        ({"refrigerant": "R999"}, "units[0].refrigerant", "not supported"),
        ({"expansion_device": "capillary"}, "units[0].expansion_device", "'capillary'"),
        ({"nominal_capacity_kW": -3}, "units[0].nominal_capacity_kW", "greater than 0"),
        ({"capacity": 3}, "units[0].capacity", "unknown field"),
        ({"id": "rtu/1"}, "units[0].id", "letters, digits"),
        (
            {"points": [{"role": "suction_pressure", "unit": "psi", "mqtt_topic": "a"}]},
            "units[0].points[0].unit",
            "ambiguous",
        ),
        (
            {"points": [{"role": "suction_pressure", "unit": "degC", "mqtt_topic": "a"}]},
            "units[0].points[0]",
            "needs pressure",
        ),
        (
            {"points": [{"role": "suction_pressur", "unit": "Pa", "mqtt_topic": "a"}]},
            "units[0].points[0].role",
            "unknown role",
        ),
        (
            {"points": [{"role": "box_temp", "unit": "degC"}]},
            "units[0].points[0]",
            "give the point a source",
        ),
        (
            {
                "points": [
                    {"role": "box_temp", "unit": "degC", "mqtt_topic": "same"},
                    {"role": "suction_temp", "unit": "degC", "mqtt_topic": "same"},
                ]
            },
            "units",
            "mqtt_topic 'same' is given to rtu-1/box_temp and rtu-1/suction_temp",
        ),
    ],
)
def test_errors_name_file_field_path_and_problem(tmp_path, change, field_path, what):
    path = write(tmp_path, minimal_site(**change))
    with pytest.raises(SiteConfigError) as caught:
        load_site(path)
    message = str(caught.value)
    assert message.startswith(f"{path}: {field_path}: ")
    assert what in message


def test_site_level_errors(tmp_path):
    document = minimal_site()
    document["site"]["timezone"] = "Mars/Olympus"
    document["site"]["elevation_m"] = 20000
    with pytest.raises(SiteConfigError) as caught:
        load_site(write(tmp_path, document))
    lines = str(caught.value).splitlines()
    assert len(lines) == 2  # one line per problem
    assert "site.timezone: unknown time zone 'Mars/Olympus'" in lines[0]
    assert "site.elevation_m:" in lines[1]


def test_unreadable_files(tmp_path):
    with pytest.raises(SiteConfigError, match="cannot read the site file"):
        load_site(tmp_path / "missing.yaml")
    broken = tmp_path / "broken.yaml"
    broken.write_text("site:\n  name: [unclosed\nunits: []\n")
    with pytest.raises(SiteConfigError, match=r"broken.yaml: line \d+, column \d+: not valid YAML"):
        load_site(broken)
    with pytest.raises(SiteConfigError, match="must hold a mapping"):
        parse_site(["a", "list"], "list.yaml")


def test_compressor_map_file_is_read_relative_to_the_site_file(tmp_path):
    (tmp_path / "maps").mkdir()
    (tmp_path / "maps" / "c.yaml").write_text("rated_superheat_K: 11.1\n")
    config = load_site(write(tmp_path, minimal_site(compressor_map_file="maps/c.yaml")))
    assert config.compressor_map_for(config.units[0]) == {"rated_superheat_K": 11.1}
    with pytest.raises(SiteConfigError, match="not both"):
        parse_site(minimal_site(compressor_map={"a": 1}, compressor_map_file="m.yaml"))


def test_apply_upserts_reports_and_retires(db_url, tmp_path):
    engine = connect(db_url)
    config = parse_site(minimal_site())
    changes = apply_site(engine, config)
    assert changes[0] == "added site 'Test'"
    assert "added point rtu-1/suction_temp" in changes
    assert apply_site(engine, config) == []  # applying again changes nothing

    document = minimal_site()
    document["units"][0]["points"] = [
        {"role": "suction_pressure", "unit": "kPa(g)", "mqtt_topic": "s/rtu-1/ps"}
    ]
    changes = apply_site(engine, parse_site(document))
    assert changes == [
        "changed point rtu-1/suction_pressure: measurement_unit 'psig' -> 'kPa(g)'",
        "retired point rtu-1/suction_temp (its readings are kept)",
    ]
    assert [p.role for p in active_points(engine, "Test")] == ["suction_pressure"]
    with engine.connect() as conn:
        assert conn.execute(select(Point.retired).where(Point.role == "suction_temp")).scalar()
        description = json.loads(conn.execute(select(Unit.description)).scalar())
    assert description["refrigerant"] == "R410A" and "points" not in description
    # back in the file: restored, not duplicated
    assert "changed point rtu-1/suction_temp: retired True -> False" in apply_site(engine, config)
    assert len(active_points(engine)) == 2


def test_errors_give_the_yaml_line(tmp_path):
    path = tmp_path / "lines.yaml"
    path.write_text(
        "site:\n  name: X\nunits:\n  - id: a\n    name: A\n    kind: rooftop_unit\n"
        "    refrigerant: R410A\n    expansion_device: txv\n    nominal_capacity_kW: 3\n"
        "    capacty: 3\n    points:\n      - role: suction_temp\n        unit: furlongs\n"
        "        mqtt_topic: u\n"
    )
    with pytest.raises(SiteConfigError) as caught:
        load_site(path)
    lines = sorted(str(caught.value).splitlines())
    assert lines[0].startswith(f"{path}: units[0].capacty: unknown field")
    assert lines[0].endswith("(line 10)")
    assert lines[1].startswith(f"{path}: units[0].points[0].unit: unknown unit 'furlongs'")
    assert lines[1].endswith("(line 13)")
