"""kit.plots: palette, rounding, figure data against kit.massprops, and static embedding."""

import html
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


def _legend_labels(fig) -> list[str]:
    out = []
    for item in fig.legend[0].items:
        lab = item.label
        out.append(getattr(lab, "value", None) or getattr(lab, "field", None))
    return out


def test_rotor_labels_use_the_font_as_a_value_not_a_data_field():
    from bokeh.models import LabelSet

    fig, _src = plots.top_view_figure(0.3)
    (labels,) = [r for r in fig.center if isinstance(r, LabelSet)]
    # bokeh reads a bare string of a data spec as a column name (common practice, no source:
    # bokeh's "Specifying visual properties" user guide)
    assert labels.text_font.value == plots.FONT
    assert getattr(labels.text_font, "field", None) is None


def test_legends_only_for_what_is_drawn():
    no_wheel, _ = plots.top_view_figure(0.3, wheel=False)
    with_wheel, _ = plots.top_view_figure(0.3, wheel=True)
    assert "wheel" not in _legend_labels(no_wheel) and "wheel" in _legend_labels(with_wheel)
    bare, _ = plots.thrust_figure(["a"], threshold=False)
    assert "review threshold" not in _legend_labels(bare)
    # every legend sits outside the plot area (below or right), never over the data
    figs = [plots.torque_figure()[0], plots.poles_figure()[0], plots.circle_figure()[0],
            *plots.response_figures(["a"], [5.0])[:2], plots.wheel_figure()[0],
            plots.map_figure(0.3, "q")[0], bare, no_wheel]
    for f in figs:
        assert f.legend[0] in (list(f.below) + list(f.right)), f.title.text


def test_notice_over_a_figure_and_anchor_keep_axes():
    fig, src = plots.poles_figure()
    assert src["anchor"].data == {"re": [0.0], "im": [0.0]}
    note = plots.add_notice(fig)
    assert not note.visible
    plots.set_notice(note, "no equilibrium: the moment balance has no solution")
    assert note.visible and note.text.startswith("no equilibrium")
    plots.set_notice(note, "")
    assert not note.visible


def test_set_data_sends_nothing_for_the_same_data():
    fig, src = plots.thrust_figure(["a"])
    events = []
    plots.in_document(fig).document.on_change(events.append)
    data = plots.thrust_data(["a"], [1.0], [2.0])["bars"]  # threshold nan
    plots.set_data(src["bars"], data)
    plots.set_data(src["bars"], dict(data))
    assert len(events) == 1


def test_threshold_contour_of_a_map():
    # z = x_B on a 3 x 3 grid: the 0.5 contour is the line x_B = 0.5, i.e. plot y = 0.5
    xs, ys = np.array([0.0, 1.0, 2.0]), np.array([-1.0, 0.0, 1.0])
    v = np.tile(xs, (3, 1))  # rows: y, columns: x
    cd = plots.contour_lines(xs, ys, v, 0.5)
    line = cd.line_data
    assert len(line.xs) == 1
    np.testing.assert_allclose(line.ys[0], 0.5)
    np.testing.assert_allclose(sorted(line.xs[0]), [-1.0, 0.0, 1.0])
    none = plots.contour_lines(xs, ys, v, 5.0).line_data.xs  # never crossed: no point drawn
    assert sum(len(x) for x in none) == 0


def test_static_figure_says_what_to_do_when_its_script_cannot_run():
    fig, _ = plots.thrust_figure(["a"])
    text = plots.embed_html(plots.in_document(fig))
    assert html.escape(plots.UNTRUSTED_NOTICE) in text and "Trust Notebook" in text
    assert "-untrusted\");\nif (note) note.remove();" in text
