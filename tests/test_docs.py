"""The handbook and the file-format pages say what the code does.

Each page under docs/formats/ is checked against the code that reads or writes the format
and against the files of the demo town it describes; DEVELOPERS.md's layout against the
package. A failure names the page, the section and the item that drifted.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs" / "formats"
DEMO = ROOT / "demo_walks"
CLASSES = ("comfortable", "neutral", "uncomfortable")


def example(page: str, tag: str) -> dict:
    text = (DOCS / page).read_text(encoding="utf-8")
    m = re.search(rf"```json {tag}\n(.*?)```", text, re.S)
    assert m, f"{page}: no ```json {tag} block"
    return json.loads(m.group(1))


def table_rows(page: str, heading: str | None = None) -> list[list[str]]:
    """Rows of the first Markdown table (after `heading` when given), cells stripped."""
    text = (DOCS / page).read_text(encoding="utf-8")
    if heading is not None:
        start = text.index(heading)
        text = text[start + len(heading):]
    rows, started = [], False
    for line in text.splitlines():
        if line.startswith("|"):
            started = True
            cells = [c.strip() for c in line.strip().strip("|").split("|")]
            if set("".join(cells)) <= set("-: "):
                continue
            rows.append(cells)
        elif started:
            break
    return rows[1:]  # without the header row


def names_in(cell: str) -> list[str]:
    return re.findall(r"`([^`]+)`", cell)


def expand(name: str) -> list[str]:
    from walkcomfort.routes.compare import DELTA_COLUMNS

    out = [name]
    if "<class>" in name:
        out = [n.replace("<class>", c) for n in out for c in CLASSES]
    if "<col>" in name:
        out = [n.replace("<col>", c) for n in out for c in DELTA_COLUMNS]
    return out


# --- scene ---------------------------------------------------------------------------

def documented_scene_properties() -> dict[str, set[str]]:
    props: dict[str, set[str]] = {}
    for kind, _geom, prop, *_ in table_rows("scene.md"):
        for p in names_in(prop):
            props.setdefault(kind, set()).add(p)
    shared = props.pop("any", set())
    return {k: v | shared | {"id", "kind"} for k, v in props.items()}


def test_scene_page_example_loads_and_covers_every_kind():
    from walkcomfort.environment.scene import KINDS, Scene

    scene = Scene.from_geojson(example("scene.md", "scene-example"), source="docs/formats/scene.md")
    assert sorted(scene.ids) == ["b1", "c1", "g1", "t1"]  # g1: a ground surface (kind "ground")
    assert set(documented_scene_properties()) == set(KINDS)


def test_scene_page_documents_every_property_the_demo_scene_uses():
    documented = documented_scene_properties()
    scene = json.loads((DEMO / "scene.geojson").read_text())
    for f in scene["features"]:
        kind = f["properties"]["kind"]
        missing = set(f["properties"]) - documented[kind]
        assert not missing, f"scene.md does not document {sorted(missing)} of a {kind}"
    assert set(scene) - {"type", "features"} <= {"walkcomfort"}


# --- scheme --------------------------------------------------------------------------

def test_scheme_page_example_applies_to_the_scene_example():
    from walkcomfort.environment.scene import Scene
    from walkcomfort.routes.schemes import apply_scheme, scheme_from_geojson

    scene = Scene.from_geojson(example("scene.md", "scene-example"))
    scheme = scheme_from_geojson(example("scheme.md", "scheme-example"), source="docs/formats/scheme.md")
    edited = apply_scheme(scene, scheme)
    assert len(edited.ids) == len(scene.ids) + 2


def test_scheme_page_documents_every_key_the_demo_schemes_use():
    documented = {p for row in table_rows("scheme.md") for p in names_in(row[0])}
    scene_props = set().union(*documented_scene_properties().values())
    for path in sorted((DEMO / "schemes").glob("*.geojson")):
        obj = json.loads(path.read_text())
        assert set(obj["walkcomfort"]) <= {"scheme", "label"}, path.name
        for f in obj["features"]:
            extra = set(f["properties"]) - documented - scene_props
            assert not extra, f"scheme.md does not document {sorted(extra)} used in {path.name}"


# --- street network ------------------------------------------------------------------

def test_network_page_example_loads():
    from walkcomfort.network.segments import network_from_geojson

    net = network_from_geojson(example("street-network.md", "network-example"))
    assert len(net.quarantine) == 0
    # s1 is about 174 m long: round(174 / 50) = 3 segments; s2 about 167 m: 3 as well
    assert set(net.segments["street_id"]) == {"s1", "s2"}
    assert net.segments["elev_start_m"].notna().any()


def test_network_page_documents_every_property_of_the_demo_streets():
    documented = {p for row in table_rows("street-network.md") for p in names_in(row[0])}
    streets = json.loads((DEMO / "streets.geojson").read_text())
    used = set().union(*(f["properties"] for f in streets["features"]))
    assert used <= documented, f"street-network.md does not document {sorted(used - documented)}"


# --- route outputs -------------------------------------------------------------------

@pytest.fixture(scope="module")
def compared(tmp_path_factory):
    from walkcomfort.cli import main

    out = tmp_path_factory.mktemp("cmp")
    args = ["compare", str(DEMO / "routes" / "mercat-parc.geojson"), "--scene", str(DEMO / "scene.geojson"),
            "--scheme", str(DEMO / "schemes" / "canopy-placa.geojson"),
            "--conditions", "t_air_c=33,rh_pct=30,wind_ms=1.5", "--depart", "2026-07-15T12:00",
            "--timezone", "Europe/Madrid", "--no-reasons", "-o", str(out)]
    assert main(args) == 0
    return out


def test_route_outputs_page_lists_exactly_the_files_written(compared):
    from walkcomfort.routes.outputs import FILES

    documented = {n for row in table_rows("route-outputs.md", "## Files") for n in names_in(row[0])}
    assert documented == set(FILES)
    assert {p.name for p in compared.iterdir()} == set(FILES)


@pytest.mark.parametrize("name", ["summary.csv", "comparison.csv", "best_departures.csv",
                                  "cost_effectiveness.csv", "along_route.csv"])
def test_route_outputs_page_documents_every_column(compared, name):
    documented: set[str] = set()
    for row in table_rows("route-outputs.md", f"## `{name}` columns"):
        for n in names_in(row[0]):
            documented.update(expand(n))
    if name == "comparison.csv":  # "every summary.csv column, and:"
        for row in table_rows("route-outputs.md", "## `summary.csv` columns"):
            for n in names_in(row[0]):
                documented.update(expand(n))
    written = list(pd.read_csv(compared / name, nrows=0).columns)
    assert set(written) - documented == set(), f"route-outputs.md lacks {name} columns"
    assert documented - set(written) == set(), f"route-outputs.md names {name} columns not written"


# --- the handbook's layout -----------------------------------------------------------

def layout_modules() -> set[str]:
    """Modules named in DEVELOPERS.md's package layout block.

    The block's lines are `  <folder>/  a.py, b.py   # what they do` (a folder's list may
    continue on indented lines without a folder) or `  module.py  # what it does`; the text
    after `#` is description only.
    """
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    block = re.search(r"## Layout\n.*?```\n(walkcomfort/\n.*?)```", text, re.S)
    assert block, "DEVELOPERS.md has no ## Layout code block starting with walkcomfort/"
    found: set[str] = set()
    folder = ""
    for line in block.group(1).splitlines()[1:]:
        body = line.split("#", 1)[0]
        m = re.match(r"^  ([\w/]+/)", body)
        if m:
            folder, body = m.group(1), body[m.end():]
        elif re.match(r"^  \w+\.py", body):
            folder = ""
        for name in re.findall(r"[\w*]+\.py", body):
            found.add(folder + name)
    return found


def package_modules() -> set[str]:
    pkg = ROOT / "walkcomfort"
    out = set()
    for p in pkg.rglob("*.py"):
        rel = p.relative_to(pkg).as_posix()
        if p.name == "__init__.py" and rel != "__init__.py":
            continue
        out.add(rel)
    return out


def test_developers_layout_names_every_module_and_only_real_ones():
    named = layout_modules()
    real = package_modules()
    missing = sorted(real - named - {"__init__.py"})
    assert not missing, f"DEVELOPERS.md layout does not name {missing}"
    ghosts = sorted(named - real)
    assert not ghosts, f"DEVELOPERS.md layout names modules that do not exist: {ghosts}"


# --- timeline ------------------------------------------------------------------------

def test_timeline_page_documents_every_column_of_an_ingested_walk():
    from walkcomfort.session.timeline import build_timeline

    tl = build_timeline(ROOT / "tests" / "fixtures" / "sessions" / "walk_ok")
    documented: set[str] = set()
    patterns: list[str] = []
    for row in table_rows("timeline.md", "## `timeline.parquet`"):
        for n in names_in(row[0]):
            if "<" in n:
                patterns.append(re.escape(n).replace(re.escape("<source>"), r"\w+"))
            else:
                documented.add(n)
    undocumented = [c for c in tl.data.columns
                    if c not in documented and not any(re.fullmatch(p, c) for p in patterns)]
    assert not undocumented, f"timeline.md does not document {undocumented}"
    text = (DOCS / "timeline.md").read_text(encoding="utf-8")
    for key in tl.qa["summary"]:
        if key in {"rows_read", "rows_used", "rows_quarantined", "reconciles"}:
            assert f"`{key}`" in text, f"timeline.md does not name qa summary key {key}"
    assert {"summary", "sources", "clocks"} <= set(tl.qa)


# --- placement advice ----------------------------------------------------------------

def test_advice_outputs_page_lists_exactly_the_files_and_ranked_columns():
    from walkcomfort.routes.placement.advisor import Advice
    from walkcomfort.routes.placement.outputs import FILES
    from walkcomfort.routes.placement.select import Selection

    documented = {n for row in table_rows("advice-outputs.md", "## Files") for n in names_in(row[0])}
    assert documented == set(FILES)
    cols = {n for row in table_rows("advice-outputs.md", "## `ranked_sites.csv` columns") for n in names_in(row[0])}
    empty = Advice("heat-dose", "", Selection(), [], pd.DataFrame(), pd.DataFrame(), 0.0, pd.DatetimeIndex([]), [],
                   1, None, 32.0)
    assert cols == set(empty.ranked().columns)


# --- session manifest ----------------------------------------------------------------

def _manifest_sections() -> dict[str, str]:
    text = (DOCS / "session-manifest.md").read_text(encoding="utf-8")
    parts = re.split(r"^### ", text, flags=re.M)[1:]
    out = {}
    for part in parts:
        head, _, body = part.partition("\n")
        m = re.match(r"`?(\[\[?[^\]`]+\]\]?)`?", head.strip())
        out[m.group(1) if m else head.strip()] = body.split("\n## ")[0]
    return out


def test_session_manifest_page_documents_every_key_the_parser_accepts():
    from walkcomfort.session.manifest import table_keys

    sections = _manifest_sections()
    for table, keys in table_keys().items():
        assert table in sections, f"session-manifest.md has no section for {table}"
        if table == "top level":  # the top level's keys are the tables: each has its own section
            missing = [k for k in keys if f"`{k}`" not in sections[table]
                       and not any(h.strip("[]").split(".")[0] == k for h in sections)]
        else:  # in a table row (`key`, or a sub-table `[source.key]`) or in a TOML example (key = ...)
            missing = [k for k in keys if f"`{k}`" not in sections[table] and f".{k}]`" not in sections[table]
                       and not re.search(rf"^{re.escape(k)}\s*=", sections[table], re.M)]
        assert not missing, f"session-manifest.md {table} does not document {missing}"


def test_every_manifest_we_ship_uses_documented_keys_only():
    import tomllib

    from walkcomfort.session.manifest import table_keys

    keys = table_keys()
    files = [ROOT / "field_protocol" / "templates" / "session.toml",
             *sorted((ROOT / "tests" / "fixtures" / "sessions").glob("*/session.toml")),
             *sorted((DEMO / "sessions").glob("*/session.toml"))]
    assert len(files) > 3
    for path in files:
        m = tomllib.loads(path.read_text(encoding="utf-8"))
        assert set(m) <= set(keys["top level"]), path
        for table, name in (("session", "[session]"), ("participant", "[participant]"), ("sensors", "[sensors]"),
                            ("checks", "[checks]")):
            assert set(m.get(table, {})) <= set(keys[name]), f"{path} [{table}]"
        for src in m.get("source", []):
            assert set(src) <= set(keys["[[source]]"]), path


# --- model bundle --------------------------------------------------------------------

def test_model_bundle_page_names_the_files_and_manifest_keys_a_fit_writes(tmp_path):
    from walkcomfort.model._synthetic import synthetic_campaign
    from walkcomfort.model.evaluate import training_table
    from walkcomfort.model.workflow import fit_table, write_fit_outputs

    table = training_table(synthetic_campaign(n_participants=4, walks_per_participant=1, duration_s=600, seed=3))
    write_fit_outputs(fit_table(table, n_estimators=10, n_boot=0, feature_set="planned"), tmp_path)
    documented = {n for row in table_rows("model-bundle.md", "## Files") for n in names_in(row[0])}
    written = {p.relative_to(tmp_path).as_posix() for p in tmp_path.rglob("*") if p.is_file()}
    written = {re.sub(r"fold_\d+", "fold_<k>", w) for w in written}
    assert written == documented
    keys = {n for row in table_rows("model-bundle.md", "## `manifest.json` keys") for n in names_in(row[0])}
    manifest = json.loads((tmp_path / "manifest.json").read_text())
    assert set(manifest) - {"walkcomfort"} == keys - {"walkcomfort-model/1"}


# --- network outputs -----------------------------------------------------------------

def test_network_outputs_page_lists_every_file_a_job_owns():
    from walkcomfort.network.jobdir import OWN_FILES, OWN_PATTERNS, RESULTS_DIR

    rows = table_rows("network-outputs.md")
    documented = {n for row in rows for n in names_in(row[0])}
    expected = set(OWN_FILES) | {p.replace("*", "<scheme>") for p in OWN_PATTERNS}
    assert expected <= documented, f"network-outputs.md lacks {sorted(expected - documented)}"
    assert any(n.startswith(RESULTS_DIR + "/") for n in documented)
    extra = {n for n in documented if not n.startswith(RESULTS_DIR + "/")} - expected
    assert not extra, f"network-outputs.md names files a job does not own: {sorted(extra)}"


# --- weather column map --------------------------------------------------------------

def test_weather_map_page_example_reads_a_logger_file(tmp_path):
    from walkcomfort.routes.loggerweather import MAP_EXTRA_KEYS, read_mapped_logger

    text = (DOCS / "weather-map.md").read_text(encoding="utf-8")
    toml = re.search(r"```toml weather-map-example\n(.*?)```", text, re.S).group(1)
    (tmp_path / "station.toml").write_text(toml, encoding="utf-8")
    # two invented readings in the layout the map describes: 86 °F = 30 °C, 18 km/h = 5 m/s
    (tmp_path / "station.csv").write_text("DateTime;Temp_F;RH;Wind_kmh\n15/07/2026 14:00;86,0;40;18,0\n"
                                          "15/07/2026 14:10;87,8;38;14,4\n", encoding="utf-8")
    df, height = read_mapped_logger(tmp_path / "station.csv", tmp_path / "station.toml")
    assert height == 2.0
    assert df.index[0] == pd.Timestamp("2026-07-15T12:00Z")  # 14:00 CEST
    assert df["t_air_c"].iloc[0] == pytest.approx(30.0)
    assert df["wind_ms"].iloc[0] == pytest.approx(5.0)
    documented = {n for row in table_rows("weather-map.md") for n in names_in(row[0])}
    assert set(MAP_EXTRA_KEYS) == documented
