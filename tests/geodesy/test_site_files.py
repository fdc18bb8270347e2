"""The site-file reader (pure): GeoJSON, KML (OGC 07-147r2) and GPX 1.1 into one GeoJSON Point or Polygon."""

import pytest

from registry.geodesy.site_files import MAX_SITE_FILE_BYTES, SiteFileError, site_from_file


def test_geojson_feature_collection_with_one_polygon_keeps_heights():
    data = (
        b'{"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {}, "geometry": '
        b'{"type": "Polygon", "coordinates": [[[0, 0, 10], [1, 0, 10], [1, 1, 10], [0, 0, 10]]]}}]}'
    )
    assert site_from_file("a.geojson", data)["coordinates"][0][0] == [0, 0, 10]


def test_kml_point_with_namespace_and_altitude_dropped():
    data = b'<kml xmlns="http://www.opengis.net/kml/2.2"><Placemark><Point><coordinates> -110.6,45.2,0 </coordinates></Point></Placemark></kml>'
    assert site_from_file("p.KML", data) == {"type": "Point", "coordinates": [-110.6, 45.2]}


def test_gpx_route_with_elevations_kept_when_asked():
    data = (
        b'<gpx xmlns="http://www.topografix.com/GPX/1/1"><rte><rtept lat="1" lon="2"><ele>5</ele></rtept>'
        b'<rtept lat="1" lon="3"><ele>6</ele></rtept><rtept lat="2" lon="3"><ele>7</ele></rtept></rte></gpx>'
    )
    ring = site_from_file("r.gpx", data, keep_heights=True)["coordinates"][0]
    assert ring == [[2.0, 1.0, 5.0], [3.0, 1.0, 6.0], [3.0, 2.0, 7.0], [2.0, 1.0, 5.0]]


@pytest.mark.parametrize(
    "name, data, code",
    [
        (
            "x.kml",
            b"<kml><Placemark><Point><coordinates>a,b</coordinates></Point></Placemark></kml>",
            "bad_coordinates",
        ),
        (
            "x.kml",
            b"<kml><Point><coordinates>1,2</coordinates></Point><Point><coordinates>1,3</coordinates></Point></kml>",
            "several_sites",
        ),
        (
            "x.gpx",
            b'<gpx><trk><trkseg><trkpt lat="1" lon="2"/><trkpt lat="1" lon="3"/></trkseg></trk></gpx>',
            "too_few_points",
        ),
        ("x.gpx", b'<?xml version="1.0"?><!DOCTYPE x SYSTEM "file:///etc/passwd"><gpx/>', "unsafe_xml"),
        ("x.geojson", b"{not json", "bad_json"),
        ("x.geojson", b"   ", "empty"),
        ("x.gpx", b"<gpx>" + b" " * MAX_SITE_FILE_BYTES + b"</gpx>", "too_large"),
    ],
)
def test_bad_files_raise_with_a_code(name, data, code):
    with pytest.raises(SiteFileError) as info:
        site_from_file(name, data)
    assert info.value.code == code and str(info.value)
