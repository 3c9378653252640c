"""The glossary: one name and one unit for every quantity in walkcomfort.

Column names carry their unit as a suffix (``_c`` degrees Celsius, ``_ms`` metres
per second, ``_pct`` percent, ``_wm2`` W m⁻², ``_db`` dB, ``_lux`` lux, ``_m``
metres, ``_deg`` degrees, ``_frac`` a fraction 0…1, ``_n`` a count, ``_s`` seconds).
Every stage imports names from here instead of typing strings, so a rename
happens in one place. Flags are boolean columns prefixed ``qa_``.

Time is the index: a tz-aware UTC :class:`pandas.DatetimeIndex` named ``time``.
"""

from __future__ import annotations

# --- identity -----------------------------------------------------------------
TIME = "time"                 # index name; tz-aware UTC
WALK_ID = "walk_id"           # one walk of one participant (a session)
PARTICIPANT = "participant"   # pseudonym, never a real name
# participant attributes from the manifest's [participant] table (campaign table columns)
AGE_BAND = "age_band"         # e.g. "25-34"
CLO = "clo"                   # [clo] clothing insulation
ACCLIMATISED = "acclimatised"  # bool: heat-acclimatised
ACTIVITY = "activity"         # e.g. "walking"
PARTICIPANT_ATTRS = (AGE_BAND, CLO, ACCLIMATISED, ACTIVITY)

# --- position and motion (session.timeline) -----------------------------------
LAT = "lat"                   # [°] WGS84
LON = "lon"                   # [°] WGS84
ELEV_M = "elev_m"             # [m] smoothed elevation above sea level
DIST_M = "dist_m"             # [m] distance along the track since the start
SPEED_MS = "speed_ms"         # [m s⁻¹] ground speed
HEADING_DEG = "heading_deg"   # [°] 0 = north, clockwise
SLOPE_PCT = "slope_pct"       # [%] rise over run along the walking direction
X_M = "x_m"                   # [m] easting in the local projected CRS
Y_M = "y_m"                   # [m] northing in the local projected CRS

# --- weather logger --------------------------------------------------------------
T_AIR_C = "t_air_c"           # [°C] air temperature
RH_PCT = "rh_pct"             # [%] relative humidity
WIND_MS = "wind_ms"           # [m s⁻¹] wind speed at the sensor height (see WIND_HEIGHT_M)
WIND_HEIGHT_M = "wind_height_m"  # [m] height of the wind measurement
T_GLOBE_C = "t_globe_c"       # [°C] globe temperature
PRESSURE_HPA = "pressure_hpa"  # [hPa] station pressure

# --- other sensors ---------------------------------------------------------------
LAEQ_DB = "laeq_db"           # [dB(A)] A-weighted equivalent level over the time step
ILLUM_LUX = "illum_lux"       # [lx] illuminance
HR_BPM = "hr_bpm"             # [min⁻¹] heart rate from GPX extensions, if present
T_DEVICE_C = "t_device_c"     # [°C] temperature from GPX extensions, if present

# --- camera frames (imagery) -------------------------------------------------------
FRAME_PATH = "frame_path"     # path of the frame attached to this step, relative to the session
SKY_FRAC = "sky_frac"         # [-] share of frame pixels classified as sky
GREEN_FRAC = "green_frac"     # [-] share of frame pixels classified as vegetation (ExG)
BRIGHTNESS_FRAC = "brightness_frac"  # [-] mean luminance 0…1
PEOPLE_N = "people_n"         # [-] pedestrians detected in the frame
FRAME_OK = "frame_ok"         # bool: frame passed the quality checks
FRAME_AGE_S = "frame_age_s"   # [s] age of the frame whose cues a step carries (imagery.attach)
FRAME_LAPVAR = "frame_lapvar" # [grey levels²] variance of the Laplacian (sharpness; imagery.quality)
QA_FRAME_BLUR = "qa_frame_blur"                # frame too blurred for cues
QA_FRAME_OVEREXPOSED = "qa_frame_overexposed"  # too many clipped highlights
QA_FRAME_UNDEREXPOSED = "qa_frame_underexposed"  # too dark / crushed shadows
QA_FRAME_OBSTRUCTED = "qa_frame_obstructed"    # something close to the lens blocks the view

# --- votes (events, never interpolated) -------------------------------------------
VOTE_COMFORT = "vote_comfort"  # one of COMFORT_CLASSES, or missing
VOTE_TSV = "vote_tsv"          # ASHRAE 55 seven-point thermal sensation, -3 … +3
VOTE_NOTE = "vote_note"        # free text typed by the participant (always escape on output)
VOTE_KIND = "vote_kind"        # "prompted" | "spontaneous" | missing

# --- environment --------------------------------------------------------------------
SUN_ELEV_DEG = "sun_elev_deg"     # [°] apparent (refraction-corrected) solar elevation
SUN_ZENITH_DEG = "sun_zenith_deg"  # [°] apparent solar zenith
SUN_AZIM_DEG = "sun_azim_deg"     # [°] solar azimuth, 0 = north, clockwise
GHI_WM2 = "ghi_wm2"               # [W m⁻²] global horizontal irradiance
DNI_WM2 = "dni_wm2"               # [W m⁻²] direct normal irradiance
DHI_WM2 = "dhi_wm2"               # [W m⁻²] diffuse horizontal irradiance
SHADE_FRAC = "shade_frac"         # [-] share of the direct beam blocked (0 sun … 1 full shade)
BEAM_TRANS_FRAC = "beam_trans_frac"  # [-] direct-beam transmittance = 1 - shade_frac
SVF = "svf"                       # [-] sky view factor (buildings and crowns as opaque)
SKY_VIEW_CROWN_FRAC = "sky_frac_crowns"  # [-] sky share not blocked by crowns (buildings ignored)
SKY_DIFFUSE_FRAC = "sky_diffuse_frac"    # [-] diffuse sky share, crowns/canopies passing it by their transmissivity
TMRT_C = "tmrt_c"                 # [°C] mean radiant temperature
TMRT_SOURCE = "tmrt_source"       # "globe" | "fluxes"
WIND10_MS = "wind10_ms"           # [m s⁻¹] wind at 10 m for UTCI (log law, z0 = 0.01 m)
UTCI_C = "utci_c"                 # [°C] Universal Thermal Climate Index
UTCI_BAND = "utci_band"           # one of UTCI_BANDS (name)

# --- comfort labels ------------------------------------------------------------------
COMFORT_CLASSES = ("comfortable", "neutral", "uncomfortable")
#: How each class is named in plots and legends.
COMFORT_LABELS = {"comfortable": "Comfortable", "neutral": "Neutral", "uncomfortable": "Uncomfortable"}
#: Each class's colour wherever it is drawn (chosen, and checked for colour-blind readers, in
#: ``walkcomfort.report.palette``; kept here so every layer draws the same colours).
COMFORT_COLOURS = {"comfortable": "#3e9fd8", "neutral": "#efc35b", "uncomfortable": "#6b1d4a"}
TSV_SCALE = {  # ASHRAE Standard 55 seven-point thermal sensation scale
    -3: "cold", -2: "cool", -1: "slightly cool", 0: "neutral",
    1: "slightly warm", 2: "warm", 3: "hot",
}

# The ten stress categories of the UTCI assessment scale (Bröde et al. 2012,
# doi:10.1007/s00484-011-0454-1), as (lower bound °C exclusive, upper bound °C inclusive, name).
UTCI_BANDS = (
    (46.0, float("inf"), "extreme heat stress"),
    (38.0, 46.0, "very strong heat stress"),
    (32.0, 38.0, "strong heat stress"),
    (26.0, 32.0, "moderate heat stress"),
    (9.0, 26.0, "no thermal stress"),
    (0.0, 9.0, "slight cold stress"),
    (-13.0, 0.0, "moderate cold stress"),
    (-27.0, -13.0, "strong cold stress"),
    (-40.0, -27.0, "very strong cold stress"),
    (float("-inf"), -40.0, "extreme cold stress"),
)

# Plausible physical ranges for QA (common practice for outdoor field logging; values
# outside are quarantined with reason "out_of_range"). (min, max) inclusive.
PHYSICAL_RANGES = {
    T_AIR_C: (-50.0, 60.0),
    RH_PCT: (0.0, 100.0),
    WIND_MS: (0.0, 60.0),
    T_GLOBE_C: (-50.0, 90.0),
    PRESSURE_HPA: (500.0, 1100.0),
    LAEQ_DB: (20.0, 140.0),
    ILLUM_LUX: (0.0, 200_000.0),
    ELEV_M: (-450.0, 9000.0),
    LAT: (-90.0, 90.0),
    LON: (-180.0, 180.0),
    VOTE_TSV: (-3.0, 3.0),
}

# Flags added by the stages (booleans; True means "look at this row")
QA_GAP = "qa_gap"                  # prefix: qa_gap_<source> — sensor value beyond the max gap
QA_SETTLING = "qa_settling"        # a lagged sensor had not settled yet
QA_GPS_JUMP = "qa_gps_jump"        # implied speed far above walking
QA_UTCI_RANGE = "qa_utci_out_of_range"  # an input outside the UTCI polynomial's validity
QA_WIND_CLAMPED = "qa_wind_clamped"     # wind at 10 m raised to the 0.5 m/s floor
QA_INSIDE_BUILDING = "qa_inside_building"  # the position falls inside a scene building footprint (GPS error)

# --- network scale (walkcomfort.network) -----------------------------------------------
SEGMENT_ID = "segment_id"          # "<street id>#<n>": one cut piece of a street line
STREET_ID = "street_id"            # properties.id of the street in the network GeoJSON
TILE_ID = "tile_id"                # "t<ix>_<iy>": the spatial tile a segment belongs to
PARTITION_ID = "partition_id"      # "<scheme>/<tile>/c<chunk>": one unit of batch work
QA_LOW_SUN = "qa_low_sun"          # sun above the horizon but below the batch's lowest elevation considered
