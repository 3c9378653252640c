"""The README of the generated ``demo_walks/`` folder (written by the generator, never by hand)."""

from __future__ import annotations

from walkcomfort.demo import latent
from walkcomfort.demo import simulator as S
from walkcomfort.demo import town as T


def readme_text(town, summaries, planted, schemes, physics, seed) -> str:
    n_votes = sum(s["votes"] for s in summaries)
    n_frames = sum(s["frames"] for s in summaries)
    walkers = sorted({s["participant"] for s in summaries})
    rows = "\n".join(
        f"| `{s['session']}` | {s['participant']} | {s['walk']} | {s['start_local'][:16].replace('T', ' ')} | "
        f"{s['duration_s'] // 60} min | {s['length_m']:.0f} m | {s['votes']} | {s['mean_utci_c']:.1f} |"
        for s in summaries)
    plant = "\n".join(
        f"- `{p['session']}` — {p['kind'].replace('_', ' ')} in the {p['source']} source"
        + (f" (device `{p['device']}` {p['offset_s']:+.0f} s, with {p['sync_events']} sync events in the manifest)"
           if p["kind"] == "clock_offset" else "")
        + (f" ({p['missing_rows']} s of rows missing)" if p["kind"] == "gap" else "")
        + (f" (lines {', '.join(str(x) for x in p['lines'])})" if p["kind"] in ("out_of_range", "duplicate") else "")
        + (f" ({len(p['points'])} fixes moved by {p['offset_m']:.0f} m)" if p["kind"] == "gps_jump" else "")
        for p in planted)
    scheme_rows = "\n".join(
        f"| `schemes/{sid}.geojson` | {v['label']} | {v['trees_added']} | {v['canopy_m2_added']:.0f} | "
        f"{v['modified']} | {v['removed']} |" for sid, v in schemes.items())
    physics_line = ("They come from the one environment chain every stage of walkcomfort uses: "
                    + ", ".join(f"`{v}`" for v in physics.values()) + ".")
    S_DAY = S.DESIGN_DAY
    return f"""# demo_walks — an INVENTED scenario

**Everything in this folder is invented.** {T.TOWN_NAME} is not a real town, the walkers
are not real people, and no file here is a measurement. The folder exists so that a
newcomer can run the whole of walkcomfort with one command (`walkcomfort demo`) and so
that every stage has realistic input to be tested on. Nothing computed from it is a
finding, and nothing computed from it is design advice.

> Heat caution: the invented walks take place in July heat with UTCI often in the
> *strong heat stress* band (32–38 °C) and above. Real field walks in such conditions
> need water, shade breaks and stop rules; follow local occupational-health guidance and
> your study's ethics approval, not this demo.

Regenerate (byte-identical for the same seed): `walkcomfort demo --regenerate`
(seed {seed}; code in `walkcomfort/demo/`).

## The town

- Site: {T.TOWN_NAME}, stated at {town.site['lat']:.2f}° N, {abs(town.site['lon']):.2f}° W,
  {town.site['elev_m']:.0f} m, time zone {town.timezone}; a dry-summer (Mediterranean-type) climate.
- `scene.geojson` — Scene GeoJSON (DEVELOPERS.md): {len(town.buildings)} buildings (heights 6–21 m),
  {len(town.trees)} street trees (crown radius, height, crown base, leaf-on transmissivity),
  {len(town.canopies)} canopies (a market arcade, a bus shelter).
- `streets.geojson` — the street network as GeoJSON LineStrings (centrelines, z = ground
  elevation [m]); properties `id`, `name`, `kind` (`street` | `road` | `path`), `width_m`,
  `traffic` (`heavy` | `light` | `none`).
- A hill: the ground rises about 24 m to the north (Carrer de la Costa climbs at up to ~11 %).
- A noisy road: Ronda Sud (y = −180 m in the local grid), about {T.ROAD_LAEQ_10M_DB:.0f} dB(A) at 10 m;
  levels fall with distance and behind the first row of buildings.
- A market square (Placa del Mercat) where people gather late morning and evening.
- `routes/` — planned routes as GeoJSON LineStrings (lon, lat, elevation) and one as a GPX
  route: {', '.join(f'`{r}`' for r in town.routes)}.

- `weather/design-day.csv` — the invented weather course of {S_DAY} (10-min logger series,
  ISO 8601 times with offset, wind at 1.1 m) for planned-route comparisons.

| scheme file | what it does | trees added | canopy m² added | modified | removed |
|---|---|---|---|---|---|
{scheme_rows}

## The sessions

{len(summaries)} sessions, {len(walkers)} pseudonymous walkers ({', '.join(walkers)}) × 2 walks, in
mid-July 2026 from morning to evening; {n_votes} comfort votes, {n_frames} camera frames.

| session | walker | loop | start (local) | duration | length | votes | mean UTCI (truth) °C |
|---|---|---|---|---|---|---|---|
{rows}

Each `sessions/<id>/` holds `session.toml` (schema `walkcomfort-session/1`) and the raw
files as the devices wrote them:

| file | device | every | format |
|---|---|---|---|
| `gps/track.gpx` | GPS logger (reference clock) | 2 s | GPX 1.1, UTC; correlated position noise ~2.5 m |
| `logger/weather.csv` | weather logger | 2 s | `dd/mm/YYYY HH:MM:SS` local; °F, %, km/h, globe °F, hPa |
| `slm/levels.csv` | sound level meter | 1 s | LAeq,1s dB(A), local ISO time |
| `lux/light.csv` | light meter | 2 s | epoch seconds (UTC), lux |
| `camera/IMG_*.jpg` | chest camera | 30 s | 160×120 JPEG, EXIF DateTimeOriginal local, no offset tag |
| `votes/votes.csv` | vote app | events | ISO 8601 with offset; labels good/ok/bad; sensation −3…+3 |

Sensor physics: the air sensor responds with τ = {S.TAU_AIR_S:.0f} s and the {S.GLOBE_DIAMETER_M * 1000:.0f} mm
grey globe (ε = {S.GLOBE_EMISSIVITY}) with τ = {S.TAU_GLOBE_S:.0f} s (first-order responses). The globe's steady
temperature is the ISO 7726 globe balance solved for the simulated Tmrt (the inverse of the
Tmrt-from-globe formula), so Tmrt recovered from the globe at steady state equals the truth.

## How the truth was made

Walkers follow two loops ({', '.join(f'`{w}`' for w in town.walks)}) at their own flat speed scaled by
Tobler's hiking function on the slope, and stop five times for a prompted vote. Sun position,
clear-sky irradiance (with an invented daily haze), direct-beam shade from the scene, sky view,
mean radiant temperature from short- and long-wave fluxes and UTCI are computed at the
walker's true position (before GPS noise). {physics_line}
Weather is an invented clear summer day: air temperature from about 21.5 °C at 06:00 to
32.5 °C at 15:30 (shifted a little day by day), nearly constant dew point, an afternoon breeze.
`truth/` keeps what the devices could not see: the per-session truth every 10 s,
the pixel shares of sky and greenery drawn into each frame (`truth/frames.csv`), and each
vote's latent score (`truth/votes.csv`).

## The comfort process (INVENTED)

The votes come from an invented process (`walkcomfort/demo/latent.py`) that is *not* built from
the comfort model's features, so that whether looking back over the walk helps is a fair test.
Each walker carries a body state T (skin-temperature-like) that follows the UTCI U with a
first-order lag of the walker's own time constant (τ = {latent.TAU_BODY_S / 60:.0f} min at 0.5 clo,
slower with more clothing) towards T_ss = {latent.SKIN_NEUTRAL_C} °C + {latent.SKIN_GAIN}·(U − {latent.UTCI_REF_C:.0f} °C).
The thermal part of the score is a static term in T and a term in its rate of change, cooling
felt more strongly than warming (the structure of transient thermal-sensation models, e.g.
Zhang et al. 2010, Building and Environment 45:380–388; the numbers are invented):

    S = a·(T − T_N) + c·dT/dt        D = k_w·S + s·max(slope, 0) + n·max(LAeq − 62, 0) + p·min(crowd, 8) + bias_w

(a = {latent.A_STATE}, c = {latent.C_WARMING} warming / {latent.C_COOLING} cooling per K/min, s = {latent.S_SLOPE},
n = {latent.N_NOISE}, p = {latent.P_CROWD}). k_w and bias_w differ per walker; each vote adds noise
(σ = {latent.VOTE_NOISE}). Votes: comfortable below {latent.COMFORTABLE_BELOW}, uncomfortable above
{latent.UNCOMFORTABLE_ABOVE}, neutral between. `truth/<session>.csv` keeps the body state as the UTCI
it corresponds to (`heat_load_c`).

## Running the chain

`walkcomfort demo [--out DIR]` runs, in this process, each stage's own command on this folder:
`ingest` (with the sensor-lag correction the manifests' time constants allow) → `frames` →
`thermal` (with `scene.geojson`) → `fit` (one model on every feature, one on what a planned walk
can supply, used for the routes and the network) → `compare` (routes `estacio-escola` and `mercat-parc`,
every scheme, departures every 2 h on {S_DAY} with `weather/design-day.csv`) → `network` (every
street segment of `streets.geojson`, three afternoon hours, every scheme) → `map` → `report`,
skipping a stage whose module is missing, and prints where each output went.
Regeneration is byte-identical for the same seed and the same library versions (the JPEG
encoder and the physics libraries shape the bytes).

## Planted imperfections (QA must find exactly these; machine-readable in `planted.json`)

{plant}

Every other source of every session is clean: no clock offset, gap, duplicate or
out-of-range row.
"""
