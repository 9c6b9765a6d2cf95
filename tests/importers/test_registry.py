"""Importer registry, read_drawing, inspection report and the public surface."""

from __future__ import annotations

import doctest
import importlib
import json
import math
import subprocess
import sys
import textwrap
from importlib import metadata
from pathlib import Path

import ezdxf
import pytest
import sectionwave.importers as pkg
from sectionwave.importers import (
    DrawingError,
    Importer,
    SectionwaveWarning,
    list_importers,
    read_drawing,
)
from sectionwave.importers import registry as reg

MODULES = ["curves", "drawing", "errors", "dxf", "svg", "clean", "registry", "inspect"]


def circle_dxf(path, units=4, r=10.0):
    doc = ezdxf.new(units=units)
    doc.modelspace().add_circle((0, 0), r)
    doc.saveas(path)
    return path


SVG = ('<svg xmlns="http://www.w3.org/2000/svg" width="20mm" height="20mm" '
       'viewBox="0 0 20 20"><circle cx="10" cy="10" r="5"/></svg>')


@pytest.mark.parametrize("name", MODULES)
def test_every_all_name_resolves(name):
    mod = importlib.import_module(f"sectionwave.importers.{name}")
    for attr in mod.__all__:
        assert getattr(mod, attr) is not None, f"{name}.{attr}"
    for attr in pkg.__all__:
        assert getattr(pkg, attr) is not None, attr


@pytest.mark.parametrize("name", MODULES)
def test_doctests(name):
    mod = importlib.import_module(f"sectionwave.importers.{name}")
    result = doctest.testmod(mod, optionflags=doctest.ELLIPSIS)
    assert result.failed == 0


def test_listing_imports_no_heavy_library():
    code = ("import sys, sectionwave.importers as I; I.list_importers(); "
            "print(any(m in sys.modules for m in ('ezdxf', 'shapely', 'defusedxml')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"


def test_builtins_listed():
    infos = {i.name: i for i in list_importers(include_plugins=False)}
    assert infos["dxf"].suffixes == (".dxf",) and infos["svg"].suffixes == (".svg",)
    assert infos["dxf"].target == "sectionwave.importers.registry:DxfImporter"


def test_read_by_suffix_content_and_format(tmp_path):
    d = read_drawing(circle_dxf(tmp_path / "a.dxf"))
    assert d.format == "dxf"
    d = read_drawing(circle_dxf(tmp_path / "a.txt"))  # no known suffix: by content
    assert d.format == "dxf"
    (tmp_path / "b.xml").write_text(SVG)
    assert read_drawing(tmp_path / "b.xml").format == "svg"
    (tmp_path / "c.dat").write_text(SVG)
    assert read_drawing(tmp_path / "c.dat", format="svg").format == "svg"
    with pytest.raises(DrawingError, match="unknown drawing format 'step'.*dxf, svg"):
        read_drawing(tmp_path / "c.dat", format="step")
    (tmp_path / "d.bin").write_bytes(b"hello")
    with pytest.raises(DrawingError, match="unknown drawing format"):
        read_drawing(tmp_path / "d.bin")


def test_units_and_layers_pass_through(tmp_path):
    d = read_drawing(circle_dxf(tmp_path / "a.dxf", units=0), units="in")
    assert d.scale_to_m == 0.0254
    with pytest.raises(DrawingError, match="no layer matches"):
        read_drawing(tmp_path / "a.dxf", units="in", layers=["X"])


def test_plugins_loaded_and_broken_skipped(tmp_path, monkeypatch):
    (tmp_path / "fake_plugin.py").write_text(textwrap.dedent("""
        from sectionwave.importers import Importer, Drawing, Piece, Line

        class GeoImporter(Importer):
            name = "geo"
            suffixes = (".geo",)
            description = "test format"

            @classmethod
            def can_read(cls, path):
                return open(path).read().startswith("GEO")

            def read(self, path, *, units=None, layers=None):
                return Drawing(pieces=[Piece(Line((0, 0), (1, 0)))], format="geo")
    """))
    monkeypatch.syspath_prepend(str(tmp_path))
    eps = [
        metadata.EntryPoint("geo", "fake_plugin:GeoImporter", reg.ENTRY_POINT_GROUP),
        metadata.EntryPoint("bad", "no_such_module_xyz:Thing", reg.ENTRY_POINT_GROUP),
    ]
    monkeypatch.setattr(reg, "_plugin_entry_points", lambda: eps)
    with pytest.warns(SectionwaveWarning, match="'bad'.*skipped"):
        names = [i.name for i in list_importers()]
    assert names == ["dxf", "svg", "geo"]
    (tmp_path / "x.geo").write_text("GEO")
    with pytest.warns(SectionwaveWarning):
        assert read_drawing(tmp_path / "x.geo").format == "geo"


def test_base_class_has_no_kwargs():
    import inspect

    for cls in (Importer, reg.DxfImporter, reg.SvgImporter):
        params = inspect.signature(cls.read).parameters.values()
        assert all(p.kind != p.VAR_KEYWORD for p in params)


def test_inspect_report(tmp_path):
    from sectionwave.importers.inspect import (
        INSPECT_SCHEMA,
        format_inspection,
        inspect_drawing,
        write_preview_png,
    )

    doc = ezdxf.new(units=4)
    msp = doc.modelspace()
    msp.add_circle((0, 0), 10)
    msp.add_circle((0, 0), 4)
    msp.add_text("tag")
    doc.saveas(tmp_path / "ring.dxf")
    report = inspect_drawing(tmp_path / "ring.dxf")
    json.dumps(report)
    assert report["schema"] == INSPECT_SCHEMA and report["is_ok"]
    (body,) = report["bodies"]
    # exact geometry: annulus pi (R^2 - r^2), perimeter 2 pi (R + r), in metres
    assert body["area_m2"] == pytest.approx(math.pi * (1e-4 - 1.6e-5), rel=1e-12)
    assert body["perimeter_m"] == pytest.approx(2 * math.pi * 0.014, rel=1e-12)
    assert len(body["holes"]) == 1
    assert report["entities"] == {"read": {"CIRCLE": 2}, "skipped": {"TEXT": 1}}
    # smallest feature: the inner radius 4 mm (the gap between the circles is 6 mm)
    assert report["smallest_feature_m"] == pytest.approx(0.004, rel=1e-12)
    text = format_inspection(report)
    assert "1 hole(s)" in text and "no errors" in text
    from sectionwave.importers.clean import clean_drawing
    from sectionwave.importers.dxf import read_dxf

    png = write_preview_png(clean_drawing(read_dxf(tmp_path / "ring.dxf")), tmp_path / "p.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


SAMPLES = Path(__file__).parents[2] / "samples" / "drawings"


@pytest.mark.parametrize("name,holes", [("ribbed_mast.dxf", 2), ("strut.svg", 1)])
def test_samples_are_clean(name, holes):
    from sectionwave.importers.inspect import inspect_drawing

    path = SAMPLES / name
    if not path.is_file():
        pytest.skip(f"{path} not generated (run samples/drawings/make_samples.py)")
    report = inspect_drawing(path)
    assert report["is_ok"]
    (body,) = report["bodies"]
    assert len(body["holes"]) == holes
    x0, y0, x1, y1 = body["bounding_box_m"]
    assert 0.05 <= max(x1 - x0, y1 - y0) <= 0.1
