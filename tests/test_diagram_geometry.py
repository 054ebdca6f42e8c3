"""The diagrams' geometry, read back from the SVG: arcs go around nodes, texts never meet.

Every check works on the document as drawn: arc paths are parsed from their ``d``
(only ``M``, ``L`` and ``C`` are expected) and sampled; node boxes are the pills'
``rect``s; text boxes are estimated from each text's characters, the font its class
gets in the document's own style sheet, its anchor and its baseline, with the
drawer's character widths (``service.drawing.text``), which the browser test at the
end compares with what chromium renders. Inputs: every scenario that can be drawn
(fresh, and the DIMACS one through the cached-answer route) and random small networks.
"""

from __future__ import annotations

import os
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from service.drawing.svg import exact
from service.drawing.text import ASCENT, DESCENT, Font, text_width
from service.kinds import KINDS
from tests.conftest import SCENARIOS, scenario
from tests.test_explorer_browser import browser  # noqa: F401  (the fixture: headless chromium)

#: The drawn kinds: those that declare a picture.
DRAWN = {name for name, kind in KINDS.items() if kind.picture is not None}

SVG = "{http://www.w3.org/2000/svg}"


# --- reading a diagram back ---------------------------------------------------------


def path_points(d: str, step: float = 1.0) -> np.ndarray:
    """Points about ``step`` apart along a path of absolute M, L and C commands."""
    commands = re.findall(r"([A-Za-z])([^A-Za-z]*)", d)
    assert {c for c, _ in commands} <= {"M", "L", "C"}, f"unexpected path commands in {d!r}"
    here, out = None, []
    for command, args in commands:
        nums = [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?", args)]
        pts = np.array(nums).reshape(-1, 2)
        if command == "M":
            here = pts[0]
            out.append(here[None, :])
            continue
        for k in range(0, len(pts), 1 if command == "L" else 3):
            ctrl = np.vstack([here, pts[k:k + (1 if command == "L" else 3)]])
            reach = np.hypot(*np.diff(ctrl, axis=0).T).sum()
            t = np.linspace(0, 1, int(reach / step) + 2)[:, None]
            if command == "L":
                out.append(ctrl[0] + t * (ctrl[1] - ctrl[0]))
            else:
                s = 1 - t
                out.append(s**3 * ctrl[0] + 3 * s * s * t * ctrl[1] + 3 * s * t * t * ctrl[2] + t**3 * ctrl[3])
            here = ctrl[-1]
    return np.concatenate(out)


def fonts_of(root) -> dict[str, Font]:
    """Font per text class, from the document's style sheet."""
    css = "".join(s.text or "" for s in root.iter(f"{SVG}style"))
    fonts = {}
    for name, body in re.findall(r"\.([\w-]+)\{([^}]*)\}", css):
        rules = dict(r.split(":", 1) for r in body.split(";") if ":" in r)
        if "font-size" in rules:
            fonts[name] = Font(float(rules["font-size"].removesuffix("px")), int(rules.get("font-weight", 400)),
                               float(rules.get("letter-spacing", "0px").removesuffix("px")))
    return fonts


def _translation(g) -> tuple[float, float]:
    m = re.fullmatch(r"translate\(([-\d.]+),([-\d.]+)\)", g.get("transform", "")) if g is not None else None
    return (float(m.group(1)), float(m.group(2))) if m else (0.0, 0.0)


def text_boxes(root) -> list[tuple[str, str, tuple, str | None]]:
    """(class, text, (x0, y0, x1, y1), node) of every text element, in document
    coordinates; ``node`` is the ``data-node`` of the node group holding it, if any."""
    fonts, out = fonts_of(root), []
    parents = {child: parent for parent in root.iter() for child in parent}
    for t in root.iter(f"{SVG}text"):
        css, content, parent = t.get("class"), t.text or "", parents.get(t)
        font = fonts[css]
        dx, dy = _translation(parent)
        x, y = float(t.get("x")) + dx, float(t.get("y")) + dy
        width = text_width(content, font)
        left = {"start": x, "middle": x - width / 2, "end": x - width}[t.get("text-anchor", "start")]
        node = parent.get("data-node") if parent is not None else None
        out.append((css, content, (left, y - ASCENT * font.size, left + width, y + DESCENT * font.size), node))
    return out


def meet(a, b, by: float = 0.0) -> bool:
    return a[0] < b[2] + by and b[0] < a[2] + by and a[1] < b[3] + by and b[1] < a[3] + by


def inside(points: np.ndarray, box, by: float) -> np.ndarray:
    return ((points[:, 0] > box[0] - by) & (points[:, 0] < box[2] + by)
            & (points[:, 1] > box[1] - by) & (points[:, 1] < box[3] + by))


def node_parts(root) -> dict[str, dict]:
    """Per node (by ``data-node``): its pill box (pill and tab) and its caption boxes."""
    boxes = {}
    for g in root.iter(f"{SVG}g"):
        if "node" not in g.get("class", "").split():
            continue
        rects = [tuple(float(r.get(k)) for k in ("x", "y", "width", "height")) for r in g.iter(f"{SVG}rect")]
        pill = (min(x for x, _, _, _ in rects), min(y for _, y, _, _ in rects),
                max(x + w for x, _, w, _ in rects), max(y + h for _, y, _, h in rects))
        boxes[g.get("data-node")] = {"pill": pill}
    return boxes


#: A label is this close to its own arc, at most (its box to the arc's centre line, in px).
NEAR = 8.0


def check_geometry(svg: bytes, arcs: list[tuple]) -> dict:
    """Assert the diagram's geometry; ``arcs`` are (tail id, head id) in order."""
    root = ET.fromstring(svg)
    nodes = node_parts(root)
    texts = text_boxes(root)
    captions = {name: [] for name in nodes}  # per node, its role and potential captions
    for css, text, box, node in texts:
        if css in ("role", "potential"):
            captions[node].append((css, text, box))
    drawn = [g for g in root.iter(f"{SVG}g") if "arc" in g.get("class", "").split()]
    assert [int(g.get("data-arc")) for g in drawn] == list(range(len(arcs)))
    strokes = []
    for g, (u, v) in zip(drawn, arcs):
        path = g.find(f"{SVG}path")
        points = path_points(path.get("d"))
        strokes.append(points)
        half = float(path.get("stroke-width")) / 2
        ends = {exact(str(u)), exact(str(v))}
        for name, parts in nodes.items():
            if name in ends:
                continue
            hit = inside(points, parts["pill"], half)
            assert not hit.any(), f"arc {g.get('data-arc')} {u}->{v} crosses node {name} at {points[hit][0]}"
            for css, text, box in captions[name]:
                hit = inside(points, box, half)
                assert not hit.any(), f"arc {g.get('data-arc')} crosses the {css} caption {text!r} of {name}"
    for i, (css_a, text_a, a, _) in enumerate(texts):
        for css_b, text_b, b, _ in texts[i + 1:]:
            assert not meet(a, b), f"{css_a} {text_a!r} meets {css_b} {text_b!r}: {a} {b}"
    labels = [(t, b) for css, t, b, _ in texts if css == "arc-label"]
    label_arcs = [int(t.get("data-arc")) for t in root.iter(f"{SVG}text") if t.get("class") == "arc-label"]
    assert sorted(label_arcs) == list(range(len(arcs)))
    for (text, box), a in zip(labels, label_arcs):
        for name, parts in nodes.items():
            assert not meet(box, parts["pill"]), f"label {text!r} of arc {a} meets node {name}"
        p = strokes[a]
        gap_x = np.maximum.reduce([box[0] - p[:, 0], np.zeros(len(p)), p[:, 0] - box[2]])
        gap_y = np.maximum.reduce([box[1] - p[:, 1], np.zeros(len(p)), p[:, 1] - box[3]])
        near = np.hypot(gap_x, gap_y).min()
        assert near <= NEAR, f"label {text!r} is {near:.1f} px from its arc {a}"
    for g in drawn:  # the slashes across a cut or binding arc cover no text either
        for line in g.iter(f"{SVG}line"):
            x1, y1, x2, y2 = (float(line.get(k)) for k in ("x1", "y1", "x2", "y2"))
            cap = float(line.get("stroke-width")) / 2
            box = (min(x1, x2) - cap, min(y1, y2) - cap, max(x1, x2) + cap, max(y1, y2) + cap)
            for css, text, other, _ in texts:
                assert not meet(box, other), f"a notch of arc {g.get('data-arc')} covers {css} {text!r}"
    width, height = float(root.get("width")), float(root.get("height"))
    for css, text, box, _ in texts:
        assert box[0] >= 0 and box[1] >= 0 and box[2] <= width and box[3] <= height, f"{text!r} off the canvas"
    return {"root": root, "texts": texts}


def _rect(r) -> tuple:
    x, y = float(r.get("x")), float(r.get("y"))
    return x, y, x + float(r.get("width")), y + float(r.get("height"))


def check_timeline(svg: bytes, arcs: list[tuple]) -> dict:
    """Assert a lanes-against-periods picture (flows over time): one row per lane in
    order, every bar, band, shut cell and cut outline inside its row and inside the
    chart's periods, and no two texts meeting."""
    root = ET.fromstring(svg)
    horizon = int(root.get("data-horizon"))
    rows = [g for g in root.iter(f"{SVG}g") if "row" in g.get("class", "").split()]
    lanes = [g for g in rows if "lane" in g.get("class").split()]
    assert [int(g.get("data-arc")) for g in lanes] == list(range(len(arcs)))
    lines = [float(line.get("x1")) for line in root.find(f"{SVG}g[@class='periods']").iter(f"{SVG}line")]
    assert len(lines) == horizon + 1
    left, right = min(lines), max(lines)
    period_w = (right - left) / horizon
    for g in rows:
        label_y = float(g.find(f"{SVG}text").get("y"))
        for r in g.iter(f"{SVG}rect"):
            x0, y0, x1, y1 = _rect(r)
            assert left - 0.01 <= x0 < x1 <= right + 0.01, f"{r.get('class')} outside the periods"
            assert y0 < label_y < y1 + 12 and y1 - y0 <= 30, f"{r.get('class')} outside its row"
            period = r.get("data-period")
            if period is not None and r.get("class") != "holdover":  # a band spans the boundary after it
                assert left + int(period) * period_w - 0.01 <= x0 and x1 <= left + (int(period) + 1) * period_w + 0.01
    texts = text_boxes(root)
    for i, (_, t1, b1, _) in enumerate(texts):
        for _, t2, b2, _ in texts[i + 1:]:
            assert not meet(b1, b2), f"texts {t1!r} and {t2!r} meet"
    return {"root": root}


# --- the inputs -----------------------------------------------------------------------


def drawable_scenarios() -> list[tuple[str, str, object]]:
    """(name, kind, body) of every scenario holding a problem of a drawn kind."""
    out = []
    for path in sorted(SCENARIOS.iterdir()):
        words = path.name.removesuffix(".json").removesuffix(".dimacs").split("-")
        kind = next((w for w in words if w in DRAWN), None)
        if path.suffix == ".dimacs":
            if kind:
                out.append((path.name, kind, scenario(path.name)))
            continue
        doc = scenario(path.name)
        if words[0] == "batch":
            out += [(f"{path.stem}/{i}", item["kind"], item["problem"])
                    for i, item in enumerate(doc["items"]) if item["kind"] in DRAWN]
        elif kind:
            out.append((path.stem, kind, doc["problem"] if words[0] == "verify" else doc))
    return out


SCENARIO_CASES = drawable_scenarios()


def arc_ends(body) -> list[tuple]:
    """(tail id, head id) of each arc of a JSON body (either form) or a DIMACS text."""
    if isinstance(body, str):
        return [(int(f[1]), int(f[2])) for f in (line.split() for line in body.splitlines()) if f and f[0] == "a"]
    arcs = body["arcs"]
    if isinstance(arcs, dict):
        return list(zip(arcs["from"], arcs["to"]))
    return [(a["from"], a["to"]) for a in arcs]


def draw(client, kind: str, body) -> bytes:
    """The diagram of ``body``: fresh for JSON, through the cached-answer route for DIMACS."""
    if isinstance(body, str):
        solved = client.post(f"/v1/{kind}", data=body, content_type="text/x-dimacs")
        assert solved.status_code == 200, solved.get_data(as_text=True)
        r = client.get(f"/v1/solutions/{solved.get_json()['digest']}/diagram.svg")
    else:
        r = client.post("/v1/diagram.svg", json={"kind": kind, "problem": body})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml", r.get_data(as_text=True)[:300]
    return r.data


SEEDS = int(os.environ.get("SLUICE_DIAGRAM_SEEDS", "40"))
NAMES = ["a", "b7", "xdock-pellow", "dc-brackenford", "store-quillmouth-west-annexe-2", "hub", "Zürich", "π-yard"]


def random_body(seed: int, kind: str) -> dict:
    """A small random network: parallel and opposite arcs, loops, unreached nodes, long
    ids, arcs without limits; for min-cost flow also costs, lower bounds and supplies."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 13))
    ids = [f"{NAMES[int(rng.integers(len(NAMES)))]}-{i}" for i in range(n)]
    m = int(rng.integers(1, 3 * n + 1))
    tail, head = rng.integers(0, n, m), rng.integers(0, n, m)
    arcs = []
    for u, v in zip(tail.tolist(), head.tolist()):
        arc = {"from": ids[u], "to": ids[v], "capacity": int(rng.integers(0, 120))}
        if rng.random() < 0.1:
            arc["capacity"] = None
        if kind == "mincostflow":
            arc["cost"] = int(rng.integers(0, 12))
            if arc["capacity"] and rng.random() < 0.25:
                arc["lower"] = int(rng.integers(1, arc["capacity"] + 1))
        if kind == "expansion" and rng.random() < 0.5:
            arc["expand_cost"], arc["expand_max"] = int(rng.integers(0, 9)), int(rng.integers(1, 60))
        arcs.append(arc)
    ends = {"source": ids[0], "sink": ids[-1], "nodes": [{"id": i} for i in ids], "arcs": arcs}
    if kind == "maxflow":
        return ends
    if kind == "resilience":  # the worst closures marked, and their losses in the labels
        return {**ends, "top": int(rng.integers(1, 6))}
    if kind == "expansion":  # widened lanes with their additions, or the cut of an infeasible target
        return {**ends, "target": int(rng.integers(0, 200))}
    if kind == "flowovertime":  # transit, shut periods, holdover limits; long ids in the row labels
        horizon = int(rng.integers(1, 16))
        for arc in arcs:
            arc["transit"] = int(rng.integers(0, 4))
            if rng.random() < 0.3:
                arc["capacity"] = [int(c) for c in rng.integers(0, 40, horizon) * (rng.random(horizon) < 0.7)]
        nodes = [{"id": i, "holdover": None if rng.random() < 0.5 else int(rng.integers(0, 30))} for i in ids]
        return {**ends, "nodes": nodes, "horizon": horizon}
    supply = np.zeros(n, dtype=int)
    for _ in range(int(rng.integers(1, 4))):
        u, v, amount = int(rng.integers(n)), int(rng.integers(n)), int(rng.integers(1, 90))
        supply[u] += amount
        supply[v] -= amount
    nodes = [{"id": i, "supply": int(s)} for i, s in zip(ids, supply)]
    return {"nodes": nodes, "arcs": arcs}


# --- the checks --------------------------------------------------------------------------


def test_every_drawable_scenario_is_found():
    names = {name for name, _, _ in SCENARIO_CASES}
    assert {"depots-maxflow", "depots-mincostflow", "depots-maxflow.dimacs"} <= names
    assert {kind for _, kind, _ in SCENARIO_CASES} == set(DRAWN)


@pytest.mark.parametrize("name,kind,body", SCENARIO_CASES, ids=[c[0] for c in SCENARIO_CASES])
def test_scenario_diagrams_route_around_nodes_and_keep_texts_apart(client, name, kind, body):
    if not isinstance(body, str):
        plain = client.post(f"/v1/{kind}", json=body)
        if plain.status_code == 422:  # a batch's deliberately bad item: the diagram refuses it alike
            r = client.post("/v1/diagram.svg", json={"kind": kind, "problem": body})
            assert r.status_code == 422
            assert [e["pointer"] for e in r.get_json()["errors"]] == [
                "/problem" + e["pointer"] for e in plain.get_json()["errors"]]
            return
    check = check_timeline if kind == "flowovertime" else check_geometry
    check(draw(client, kind, body), arc_ends(body))


@pytest.mark.parametrize("kind", sorted(DRAWN))
def test_random_networks_route_around_nodes_and_keep_texts_apart(client, kind):
    failures = []
    check = check_timeline if kind == "flowovertime" else check_geometry
    for seed in range(SEEDS):
        body = random_body(seed, kind)
        try:
            check(draw(client, kind, body), arc_ends(body))
        except AssertionError as exc:
            failures.append(f"seed {seed}: {str(exc).splitlines()[0]}")
    assert not failures, f"{len(failures)} of {SEEDS} random networks:\n" + "\n".join(failures)


def test_networks_without_arcs_are_drawn(client):
    for kind, body in (("maxflow", {"source": "a", "sink": "b", "nodes": [{"id": "a"}, {"id": "b"}], "arcs": []}),
                       ("mincostflow", {"nodes": [{"id": "a"}], "arcs": []})):
        root = check_geometry(draw(client, kind, body), [])["root"]
        assert len(node_parts(root)) == len(body["nodes"])


@pytest.mark.browser
def test_text_widths_hold_what_chromium_renders(browser, client, tmp_path):
    """The drawer's widths are at least what a browser draws (so boxes that do not meet
    on paper do not meet on screen), measured per text with getBoundingClientRect."""
    cases = [(kind, body) for _, kind, body in SCENARIO_CASES if not isinstance(body, str)]
    cases += [(kind, random_body(seed, kind)) for seed in (3, 11) for kind in sorted(DRAWN)]
    cases.append(("maxflow", {"source": "Zürich-ЖД-ü", "sink": "t\u0000", "arcs": [
        {"from": "Zürich-ЖД-ü", "to": "t\u0000", "capacity": 12345678}]}))
    measured = 0
    for i, (kind, body) in enumerate(cases):
        r = client.post("/v1/diagram.svg", json={"kind": kind, "problem": body})
        if r.status_code != 200:
            continue
        page = tmp_path / f"diagram-{i}.svg"
        page.write_bytes(r.data)
        browser.get(page.as_uri())
        real = browser.execute_script(
            "return [...document.querySelectorAll('text')].map(t => {"
            " const r = t.getBoundingClientRect(); return [t.textContent, r.left, r.right]; });")
        estimated = text_boxes(ET.fromstring(r.data))
        assert [t for t, _, _ in real] == [t for _, t, _, _ in estimated]
        for (text, left, right), (css, _, box, _) in zip(real, estimated):
            if not text:
                continue
            assert box[0] - 0.5 <= left and right <= box[2] + 0.5, (
                f"{css} {text!r}: drawn over {left:.1f}..{right:.1f}, estimated {box[0]:.1f}..{box[2]:.1f}")
            measured += 1
    assert measured > 100
