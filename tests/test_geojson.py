"""GeoJSON link export, checked against the structure RFC 7946 prescribes.

Butler et al. (2016), RFC 7946 "The GeoJSON Format": section 3.3 (a FeatureCollection has
a "features" array), 3.2 (a Feature has "type", "geometry" and "properties"), 3.1.4 (a
LineString's "coordinates" is an array of two or more positions), 3.1.1 (a position is
an array of numbers, longitude/easting first), 4 (coordinates are WGS 84 lon/lat; the
"crs" member of the 2008 draft was removed), 6.1 (foreign members allowed).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import congest
from congest.exceptions import InputError, NetworkError
from congest.io.geojson import (
    coordinate_note,
    is_lonlat,
    link_feature_collection,
    read_link_geojson,
    write_link_geojson,
)
from congest.network import Network


def small(crs="EPSG:4326"):
    # three one-way links around a triangle near 59.9 N 10.7 E, fictional roads
    return Network(node_ids=[10, 20, 30], tail=[0, 1, 2, 1], head=[1, 2, 0, 0],
                   capacity=[900.0, 800.0, 700.0, 600.0], free_flow_time=[2.0, 3.0, 4.0, 2.0],
                   zone_ids=[1, 2], zone_nodes=[0, 2], demand=[[0, 500], [300, 0]],
                   x=[10.70, 10.75, 10.72], y=[59.90, 59.91, 59.95], crs=crs,
                   link_ids=[101, 102, 103, 104], link_attrs={"facility_type": [
                       "arterial", "arterial", "local", "local"]})


def check_rfc7946(fc, net):
    assert fc["type"] == "FeatureCollection"
    assert "crs" not in fc  # RFC 7946 section 4
    assert isinstance(fc["features"], list) and len(fc["features"]) == net.n_links
    for feat, t, h in zip(fc["features"], net.tail, net.head, strict=True):
        assert feat["type"] == "Feature"
        assert set(feat) >= {"type", "geometry", "properties"}
        geom = feat["geometry"]
        assert geom["type"] == "LineString"
        coords = geom["coordinates"]
        assert isinstance(coords, list) and len(coords) >= 2
        for pos in coords:
            assert isinstance(pos, list) and len(pos) == 2
            assert all(isinstance(v, float) and math.isfinite(v) for v in pos)
        assert coords == [[net.x[t], net.y[t]], [net.x[h], net.y[h]]]
        assert isinstance(feat["properties"], dict)


def test_structure_and_properties():
    net = small()
    ue = congest.solve(net, tol=1e-8)
    fc = link_feature_collection(net, ue)
    check_rfc7946(fc, net)
    props = fc["features"][0]["properties"]
    assert props["link_id"] == 101 and props["from_node"] == 10 and props["to_node"] == 20
    assert props["facility_type"] == "arterial"
    assert set(props) >= {"volume", "travel_time", "generalized_cost", "volume_capacity"}
    # lon/lat: no note needed; positions within the WGS 84 ranges
    assert "coordinate_note" not in fc
    for feat in fc["features"]:
        for lon, lat in feat["geometry"]["coordinates"]:
            assert -180 <= lon <= 180 and -90 <= lat <= 90


def test_volumes_round_trip_through_a_file(tmp_path):
    net = small()
    ue = congest.solve(net, tol=1e-8)
    path = tmp_path / "links.geojson"
    write_link_geojson(path, net, ue)
    # strict JSON (no NaN): the unknown lengths became null
    data = json.loads(path.read_text(), parse_constant=lambda c: pytest.fail(c))
    check_rfc7946(data, net)
    assert data["features"][0]["properties"]["length"] is None
    back = read_link_geojson(path)
    np.testing.assert_array_equal(back["link_id"], net.link_ids)
    np.testing.assert_array_equal(back["volume"], ue.flow)  # exact: JSON keeps 17 digits
    assert [p.name for p in tmp_path.iterdir()] == ["links.geojson"]


def test_not_lonlat_is_said():
    for crs in ("", "EPSG:32632", "local grid, metres"):
        fc = link_feature_collection(small(crs=crs))
        assert "not longitude/latitude" in fc["coordinate_note"] or \
            "not known to be longitude/latitude" in fc["coordinate_note"]
        assert "RFC 7946" in fc["coordinate_note"]
    assert is_lonlat("OGC:CRS84") and is_lonlat("epsg:4326") and not is_lonlat("EPSG:3857")
    assert coordinate_note("EPSG:3857") == "Coordinates are in EPSG:3857, not longitude/latitude."


def test_dataframe_results_are_matched_by_link_id():
    net = small()
    table = pd.DataFrame({"link_id": [103, 101, 104, 102], "volume": [3.0, 1.0, 4.0, 2.0]})
    fc = link_feature_collection(net, table)
    assert [f["properties"]["volume"] for f in fc["features"]] == [1.0, 2.0, 3.0, 4.0]
    with pytest.raises(NetworkError, match="no row for link id 102"):
        link_feature_collection(net, table.iloc[:3])


def test_missing_coordinates_and_bad_columns_are_refused():
    net = small()
    with pytest.raises(NetworkError, match="node 20 has no coordinates"):
        link_feature_collection(net.replace(x=[10.7, np.nan, 10.72]))
    with pytest.raises(NetworkError, match="has 2 values for 4 links"):
        link_feature_collection(net, {"volume": [1.0, 2.0]})


def test_reading_something_else_is_an_input_error(tmp_path):
    path = tmp_path / "points.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [0, 0]},
         "properties": {}}]}))
    with pytest.raises(InputError, match="not a LineString"):
        read_link_geojson(path)
    path.write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        read_link_geojson(path)
