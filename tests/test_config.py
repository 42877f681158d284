"""The study file: keys, defaults, cross-field checks, messages, elements and the schema."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from covergrid.constants import WGS84_A_KM
from covergrid.errors import StudyError
from covergrid.study import Study, export_schema, load_study, parse_study, resolve
from covergrid.study.loading import parse_yaml

REPO = Path(__file__).resolve().parents[1]
# Angles converted deg -> rad -> deg round-trip to float precision.
FLOAT_ANGLE_RAD = 1e-12
ONE_METRE_KM = 1e-3

MINIMAL = """\
study: minimal
epoch: 2031-03-20T00:00:00Z
duration_h: 6
step_s: 60
constellation:
  - walker: {pattern: delta, total: 6, planes: 3, phasing: 1}
    template: {altitude_km: 1200, inclination_deg: 55}
"""


def _study(text: str = MINIMAL, **replace) -> Study:
    data = parse_yaml(text)
    data.update(replace)
    return parse_study(data)


def _error(text: str = MINIMAL, **replace) -> str:
    with pytest.raises(StudyError) as info:
        _study(text, **replace)
    return str(info.value)


def test_defaults_are_filled_in():
    s = _study()
    d = s.resolved_dict()
    assert d["sensor"] == {"min_elevation_deg": 10.0, "max_off_nadir_deg": None,
                           "max_range_km": None, "min_sun_elevation_deg": None,
                           "min_off_nadir_deg": None, "look_side": "both"}
    assert d["grid"] == {"resolution_deg": 2.0, "lat_min_deg": -90.0, "lat_max_deg": 90.0,
                         "lon_min_deg": -180.0, "lon_max_deg": 180.0}
    assert d["region"] is None and d["targets"] is None
    assert d["compute"]["scheduler"] == "threads"
    assert d["requirement"] is None
    assert d["maps"]["projection"] == "robinson"
    t = d["constellation"][0]["template"]
    assert (t["eccentricity"], t["raan_deg"], t["arg_perigee_deg"], t["mean_anomaly_deg"]) == (
        0.0, 0.0, 0.0, 0.0)
    assert d["epoch"] == "2031-03-20T00:00:00Z"
    assert resolve(s).n_steps == 360 and s.duration_s == 21600.0 and s.n_satellites == 6


def test_listed_keplerian_satellite_gets_zero_defaults():
    data = parse_yaml(MINIMAL)
    data["constellation"] = [{"satellites": [{"id": "a", "altitude_km": 700,
                                              "inclination_deg": 98, "mean_anomaly_deg": 5}]}]
    sat = parse_study(data).resolved_dict()["constellation"][0]["satellites"][0]
    assert (sat["eccentricity"], sat["raan_deg"], sat["arg_perigee_deg"]) == (0.0, 0.0, 0.0)


def test_resolved_yaml_round_trips_to_the_same_study():
    s = _study()
    again = parse_study(parse_yaml(s.dump_resolved_yaml()))
    assert again == s


def test_epoch_quoted_unquoted_and_offset_agree():
    a = _study(epoch="2031-03-20T00:00:00Z")
    b = _study(epoch="2031-03-20T02:00:00+02:00")
    c = _study()  # unquoted: YAML reads a datetime
    assert a.epoch == b.epoch == c.epoch == "2031-03-20T00:00:00Z"
    assert resolve(a).epoch == np.datetime64("2031-03-20T00:00:00", "ns")


def test_to_elements_walker_in_radians():
    es = resolve(_study()).elements
    assert len(es) == 6
    np.testing.assert_allclose(es.a_km, WGS84_A_KM + 1200.0, atol=ONE_METRE_KM)
    np.testing.assert_allclose(es.i_rad, math.radians(55.0), atol=FLOAT_ANGLE_RAD)
    assert es.ids[0] == "S-P01-01"
    # Walker delta 6/3/1: planes at RAAN 0, 120, 240 deg (Walker's T/P/F convention).
    np.testing.assert_allclose(np.unique(np.round(np.degrees(es.raan_rad), 9)),
                               [0.0, 120.0, 240.0])


def test_to_elements_listed_satellites_and_group_names():
    text = MINIMAL.replace("  - walker:", "  - name: ring\n    walker:") + """\
  - satellites:
      - {id: probe, semi_major_axis_km: 7000, eccentricity: 0.01, inclination_deg: 98,
         raan_deg: 30, arg_perigee_deg: 90, true_anomaly_deg: 0}
      - {id: 7, position_km: [7000, 0, 0], velocity_km_s: [0, 7.546, 0]}
"""
    s = _study(text)
    sat = s.resolved_dict()["constellation"][1]["satellites"][1]
    assert sat["eccentricity"] is None and sat["position_km"] == [7000.0, 0.0, 0.0]
    es = resolve(s).elements
    assert es.ids[0] == "ring-P01-01" and es.ids[-2:] == ("probe", "7")
    assert es.a_km[-2] == 7000.0
    np.testing.assert_allclose(es.raan_rad[-2], math.radians(30.0), atol=FLOAT_ANGLE_RAD)


@pytest.mark.parametrize(
    ("replace", "path", "fragment"),
    [
        ({"duration_h": 0}, "duration_h", "got 0"),
        ({"step_s": -5}, "step_s", "allowed: value >= 0.001"),
        ({"step_s": 25000}, "step_s", "must not exceed the span"),
        ({"step_s": 7}, "step_s", "whole number of steps"),
        ({"study": "../up"}, "study", "path separators"),
        ({"study": "a\x07b"}, "study", "control characters"),
        ({"study": ".."}, "study", "'..'"),
        ({"epoch": "2031-13-01"}, "epoch", "2031-13-01"),
        ({"constellation": []}, "constellation", "at least 1 item"),
        ({"sensor": {"min_elevation_deg": float("nan")}}, "sensor.min_elevation_deg",
         "finite number"),
        ({"sensor": {"max_off_nadir_deg": 90}}, "sensor.max_off_nadir_deg", "< 90"),
        ({"grid": {"resolution_deg": 0.01}}, "grid.resolution_deg", "0.05 <= value <= 30"),
        ({"grid": {"lat_min_deg": 20, "lat_max_deg": -20}}, "grid.lat_min_deg",
         "less than lat_max_deg"),
        ({"grid": {"resolution_deg": 7}}, "grid.resolution_deg", "whole multiple"),
        ({"requirement": {"metric": "max_gap"}}, "requirement.at_most", "exactly one"),
        ({"requirement": {"metric": "nfold_fraction", "at_least": 0.9}}, "requirement.k",
         "is required"),
        ({"requirement": {"metric": "max_gap", "at_most": 1, "area_fraction": 1.5}},
         "requirement.area_fraction", "got 1.5"),
        ({"compute": {"scheduler": "tcp://"}}, "compute.scheduler", "tcp://host:port"),
        ({"maps": {"metrics": ["max_gap", "maxgap"]}}, "maps.metrics[1]",
         "did you mean 'max_gap'"),
        ({"grid": {"resolution": 2}}, "grid.resolution", "did you mean 'resolution_deg'"),
        ({"duration_h": "24"}, "duration_h", "must be a number; got '24'"),
        ({"duration_h": True}, "duration_h", "must be a number; got True"),
    ],
)
def test_one_problem_one_message(replace, path, fragment):
    msg = _error(**replace)
    assert msg.startswith(f"{path}: "), msg
    assert fragment in msg
    assert "\n" not in msg


@pytest.mark.parametrize(
    ("walker", "template", "path", "fragment"),
    [
        ({"pattern": "delta", "total": 24, "planes": 5, "phasing": 1}, None,
         "constellation[0].walker.planes", "allowed: 1, 2, 3, 4, 6, 8, 12, 24; got 5"),
        ({"pattern": "delta", "total": 24, "planes": 4, "phasing": 4}, None,
         "constellation[0].walker.phasing", "allowed: 0 to 3; got 4"),
        ({"pattern": "ring", "total": 2, "planes": 2, "phasing": 0}, None,
         "constellation[0].walker.pattern", "'delta' or 'star'"),
        (None, {"altitude_km": 1200, "inclination_deg": 55, "eccentricity": 1.0},
         "constellation[0].template.eccentricity", "< 1.0"),
        (None, {"semi_major_axis_km": 7000, "inclination_deg": 55, "eccentricity": 0.2},
         "constellation[0].template.eccentricity", "below the surface"),
        (None, {"altitude_km": 1200, "semi_major_axis_km": 7578, "inclination_deg": 55},
         "constellation[0].template.altitude_km", "exactly one"),
        (None, {"altitude_km": 1200, "inclination_deg": 181},
         "constellation[0].template.inclination_deg", "0.0 <= value <= 180.0"),
    ],
)
def test_walker_and_template_checks(walker, template, path, fragment):
    data = parse_yaml(MINIMAL)
    if walker is not None:
        data["constellation"][0]["walker"] = walker
    if template is not None:
        data["constellation"][0]["template"] = template
    with pytest.raises(StudyError) as info:
        parse_study(data)
    msg = str(info.value)
    assert msg.startswith(f"{path}: "), msg
    assert fragment in msg


def test_duplicate_ids_name_both_places():
    data = parse_yaml(MINIMAL)
    sat = {"id": "twin", "altitude_km": 700, "inclination_deg": 98, "mean_anomaly_deg": 0}
    data["constellation"].append({"satellites": [sat, dict(sat)]})
    with pytest.raises(StudyError, match=r"^constellation\[1\]\.satellites\[1\]\.id: duplicate "
                       r"satellite id, already used at constellation\[1\]\.satellites\[0\]"
                       r"\.id.*got 'twin'"):
        parse_study(data)


@pytest.mark.parametrize(
    ("state", "path", "fragment"),
    [
        ({"position_km": [7000, 0, 0], "velocity_km_s": [0, 11.0, 0]},
         "velocity_km_s", "unbound orbit"),
        ({"position_km": [6000, 0, 0], "velocity_km_s": [0, 7.5, 0]},
         "position_km", "inside the Earth"),
        ({"position_km": [7000, 0, 0], "velocity_km_s": [0, 4.0, 0]},
         "velocity_km_s", "perigee radius"),
        ({"position_km": [7000, 0], "velocity_km_s": [0, 7.5, 0]},
         "position_km", "exactly 3 items"),
        ({"position_km": [7000, 0, 0]}, "velocity_km_s", "needs both"),
    ],
)
def test_state_vector_checks(state, path, fragment):
    data = parse_yaml(MINIMAL)
    data["constellation"] = [{"satellites": [{"id": "s1", **state}]}]
    with pytest.raises(StudyError) as info:
        parse_study(data)
    msg = str(info.value)
    assert msg.startswith(f"constellation[0].satellites[0].{path}: "), msg
    assert fragment in msg


def test_many_problems_are_gathered_into_one_report():
    data = parse_yaml(MINIMAL)
    data["step_s"] = 0
    data["grid"] = {"resolution_deg": 100}
    data["sensr"] = {}
    with pytest.raises(StudyError) as info:
        parse_study(data)
    msg = str(info.value)
    assert msg.startswith("3 problems in the study:")
    for fragment in ("step_s: ", "grid.resolution_deg: ", "sensr: unknown key (did you mean "
                     "'sensor'?)"):
        assert fragment in msg


def test_yaml_object_tags_are_refused(tmp_path):
    f = tmp_path / "evil.yaml"
    f.write_text("study: !!python/object/apply:os.system ['echo hi']\n", encoding="utf-8")
    with pytest.raises(StudyError, match=r"evil.yaml: line 1, column 8: tag "
                       r"'tag:yaml.org,2002:python/object/apply:os.system' is not allowed"):
        load_study(f)


def test_yaml_syntax_error_has_line_and_column(tmp_path):
    f = tmp_path / "broken.yaml"
    f.write_text("study: x\nepoch: [2031\nstep_s: 1\n", encoding="utf-8")
    with pytest.raises(StudyError, match=r"broken.yaml: line \d+, column \d+: YAML syntax error"):
        load_study(f)


def test_duplicate_yaml_keys_are_refused(tmp_path):
    f = tmp_path / "twice.yaml"
    f.write_text(MINIMAL + "step_s: 30\n", encoding="utf-8")
    with pytest.raises(StudyError, match=r"line 8, column 1: duplicate key 'step_s'"):
        load_study(f)


def test_not_utf8_is_refused(tmp_path):
    f = tmp_path / "latin1.yaml"
    f.write_bytes(MINIMAL.replace("minimal", "caf\xe9").encode("latin-1"))
    with pytest.raises(StudyError, match=r"latin1.yaml: not UTF-8 text \(byte 0xe9 on line 1\)"):
        load_study(f)


def test_missing_and_empty_files(tmp_path):
    with pytest.raises(StudyError, match="no such file"):
        load_study(tmp_path / "nope.yaml")
    f = tmp_path / "empty.yaml"
    f.write_text("", encoding="utf-8")
    with pytest.raises(StudyError, match="empty.yaml: is empty"):
        load_study(f)
    f.write_text("- 1\n- 2\n", encoding="utf-8")
    with pytest.raises(StudyError, match="top level must be a mapping"):
        load_study(f)


def test_schema_file_is_up_to_date():
    # configs/schema.json is generated by `make schema` (covergrid schema > configs/schema.json).
    on_disk = json.loads((REPO / "configs" / "schema.json").read_text(encoding="utf-8"))
    assert on_disk == export_schema(), "configs/schema.json is stale: run `make schema`"


def test_schema_validates_what_the_models_accept():
    jsonschema = pytest.importorskip("jsonschema")
    schema = export_schema()
    good = _study().resolved_dict()
    jsonschema.validate(good, schema)
    bad = dict(good, grid={"resolution_deg": 2.0, "bogus": 1})
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)
