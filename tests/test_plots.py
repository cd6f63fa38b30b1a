"""kit.plots: palette, rounding, figure data against kit.massprops, and static embedding."""

import json
import re
from dataclasses import replace

import numpy as np
import pytest

from kit import plots
from kit.analysis.vehicle import Vehicle
from kit.design import load
from tests.conftest import ROOT

SURVEY = ROOT / "data" / "designs" / "survey_quad.toml"


@pytest.fixture(scope="module")
def veh():
    return Vehicle.from_design(load(SURVEY))


def test_okabe_ito_palette_is_the_published_one():
    # Okabe & Ito (2008), Color Universal Design, the eight colours as hex
    assert set(plots.OKABE_ITO.values()) == {"#000000", "#E69F00", "#56B4E9", "#009E73",
                                            "#F0E442", "#0072B2", "#D55E00", "#CC79A7"}
    assert len(plots.TOL_IRIDESCENT) == 23  # Tol, SRON/EPS/TN/09-002: 23 iridescent colours


def test_rounded_and_fmt():
    assert plots.rounded([1.23456789, 0.0, float("nan")], 4)[:2] == [1.235, 0.0]
    assert np.isnan(plots.rounded([float("nan")])[0])
    assert plots.fmt(12345.678, 3, "N") == "1.23e+04 N"
    assert plots.fmt(0.5, 3, "kg") == "0.5 kg"
    assert plots.fmt(None) == "\u2013"
    assert plots.fmt(True) == "yes"


def test_top_view_data_is_the_mass_properties(veh):
    data = plots.top_view_data(veh.design, veh.mp)
    pos = veh.mp.rotor_positions_m
    # plot coordinates are (-y_B, x_B)
    np.testing.assert_allclose(data["rotors"]["sx"], -pos[:, 1], rtol=1e-5, atol=1e-12)
    np.testing.assert_allclose(data["rotors"]["sy"], pos[:, 0], rtol=1e-5, atol=1e-12)
    assert data["rotors"]["name"] == list(veh.names)
    ccw = [r.spin > 0 for r in veh.design.rotors]
    assert [c == plots.COLOURS["ccw"] for c in data["rotors"]["colour"]] == ccw
    assert len(data["axes"]["xs"]) == 3
    assert data["wheel"]["sx"] == []


def test_thrust_data_greys_failed_rotors():
    d = plots.thrust_data(["a", "b"], [1.0, 0.0], [2.0, 2.0], working=[True, False],
                          spin=[1, -1], threshold_fraction=0.5)["bars"]
    assert d["colour"] == [plots.COLOURS["ccw"], plots.COLOURS["failed"]]
    assert d["threshold"] == [1.0, 1.0]
    assert d["label"] == ["ccw rotor", "failed"]


def test_embed_is_deterministic_escaped_and_inert_offline(veh):
    fig, src = plots.thrust_figure(["a</script><b>", "b"])
    plots.set_data(src["bars"], plots.thrust_data(["a</script><b>", "b"], [1, 2], [3, 3])["bars"])
    plots.in_document(fig)
    one, two = plots.embed_html(fig), plots.embed_html(fig)
    ids = [re.search(r'id="(rb-fig-\d+)"', h).group(1) for h in (one, two)]
    assert ids[0] != ids[1]  # numbered per process: a figure shown twice does not clash
    docs = [re.search(r"^const docs_json = (.*);$", h, re.M).group(1) for h in (one, two)]
    j1, j2 = (json.loads(d) for d in docs)
    assert list(j1.values()) == list(j2.values())  # same content, only the ids differ
    assert "</script><b>" not in one and "a\\u003c/script\\u003e" in one
    assert "Bokeh.embed.embed_items" in one
    # it loads BokehJS only inside a Jupyter page, from the server's own path
    assert "jupyter-config-data" in one and plots.bokehjs_url_path() in one
    assert "<script src" not in one and "cdn.bokeh.org" not in one


def test_embed_of_a_design_with_a_hostile_name(veh):
    d = replace(veh.design, rotors=tuple(replace(r, name=f"<img src=x>{i}")
                                         for i, r in enumerate(veh.design.rotors)))
    fig, src = plots.top_view_figure(0.3)
    for k, v in plots.top_view_data(d, veh.mp).items():
        plots.set_data(src[k], v)
    html_text = plots.embed_html(fig)
    assert "<img" not in html_text


def test_embedder_patches_only_changed_sources_and_matches_a_full_serialisation():
    fig, src = plots.thrust_figure(["a", "b"])
    emb = plots.Embedder(fig)
    emb.html()
    plots.set_data(src["bars"], plots.thrust_data(["a", "b"], [1.5, float("nan")], [3, 3],
                                                  threshold_fraction=0.5)["bars"])
    patched = json.loads(json.dumps(emb.doc_json()))
    full = json.loads(json.dumps(fig.document.to_json(deferred=False)))
    assert patched == full
    fig.title.text = "another title"  # any other change: whole document again
    assert emb.doc_json()["roots"][0]["attributes"]["title"]["attributes"]["text"] == \
        "another title"
