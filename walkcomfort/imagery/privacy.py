"""Privacy tools: consistent pseudonyms, trimming track ends, cleaning files for sharing.

Pseudonyms
----------
A participant code such as ``P07`` is already a pseudonym inside the team, but the
key that links it to a person lives with the team; a shared copy should not carry even
that code. :func:`pseudonym` replaces it with a keyed hash,

    ``P-`` + the first 10 hex digits of HMAC-SHA256(secret, ``"participant" ‖ 0x00 ‖ code``)

(RFC 2104 HMAC with SHA-256, FIPS 180-4). The same code and the same secret give the
same pseudonym in every file and every session, so shared sessions of one walker can
still be linked to each other — but not to the team's code without the secret, and a
plain hash would not do that: participant codes are few and guessable, so anyone
could hash ``P01``…``P99`` and match. Session ids are replaced the same way with
prefix ``S-``. The secret is the project's: keep it out of the shared folder and out
of version control, use at least :data:`MIN_SECRET_BYTES` random bytes (e.g.
``python -c "import secrets; print(secrets.token_hex(32))"``), and use the *same*
secret for every share of one project, or pseudonyms will not match across shares.
Losing it only means new shares get new pseudonyms.

Track ends
----------
Walks often start and end at a participant's home or workplace. :func:`trim_mask`
marks every point within ``radius_m`` of the track's first or last timed point (great-
circle distance, mean Earth radius), wherever along the walk it occurs, so a loop that
passes the front door mid-walk does not reveal it either. 200 m is our default; the
study's ethics approval may ask for more.
"""

from __future__ import annotations

import hashlib
import hmac
import math
import os
import re
from pathlib import Path

import numpy as np

from walkcomfort.errors import InputError

#: Shortest accepted secret [bytes]: below this, pseudonyms could be found by trying secrets.
MIN_SECRET_BYTES = 16
#: Environment variable read when no secret file is given.
SECRET_ENV = "WALKCOMFORT_SHARE_SECRET"
#: Default trimming radius around the start and end of a track [m].
TRIM_RADIUS_M = 200.0
#: Mean Earth radius [m] (IUGG R1), for great-circle distances.
EARTH_RADIUS_M = 6_371_008.8
#: Hex digits kept from the HMAC (40 bits: collisions are negligible for any study's ids).
PSEUDONYM_HEX = 10


def load_secret(secret_file: str | os.PathLike | None = None, env: str = SECRET_ENV) -> bytes:
    """The project secret for pseudonyms, from a file or an environment variable.

    The file's content (or the variable's value) is used as bytes, without its
    trailing newline. Never pass the secret on the command line: it would stay in the
    shell's history.

    Raises
    ------
    InputError
        No secret, an unreadable file, or a secret shorter than :data:`MIN_SECRET_BYTES`.
    """
    if secret_file is not None:
        p = Path(secret_file)
        try:
            secret = p.read_bytes().rstrip(b"\r\n")
        except FileNotFoundError:
            raise InputError("secret file not found", where=p,
                             fix="give the file that holds the project's pseudonym secret") from None
        where = str(p)
    else:
        value = os.environ.get(env)
        if not value:
            raise InputError(f"no pseudonym secret: neither --secret-file nor the {env} variable was given",
                             where="walkcomfort share", fix="create one with: python -c \"import secrets; print(secrets.token_hex(32))\" "
                                 "> project.secret, keep it private, and pass --secret-file project.secret")
        secret = value.encode("utf-8")
        where = f"${env}"
    if len(secret) < MIN_SECRET_BYTES:
        raise InputError(f"the pseudonym secret has {len(secret)} bytes; at least {MIN_SECRET_BYTES} are needed",
                         where=where, fix="use a long random secret, e.g. secrets.token_hex(32)")
    return secret


def pseudonym(value: str, secret: bytes, kind: str = "participant") -> str:
    """Keyed-hash pseudonym of an identifier (see the module notes).

    Parameters
    ----------
    value : str
        The identifier (surrounding spaces are ignored).
    secret : bytes
        The project secret (:func:`load_secret`).
    kind : {"participant", "session"}
        Which kind of identifier; the kind is part of the hashed message, so a
        participant and a session with the same code get unrelated pseudonyms.

    Returns
    -------
    str
        ``P-`` or ``S-`` followed by :data:`PSEUDONYM_HEX` upper-case hex digits.
    """
    prefixes = {"participant": "P-", "session": "S-"}
    if kind not in prefixes:
        raise InputError(f"pseudonym kind {kind!r} is not allowed; use {sorted(prefixes)}",
                         fix="say whether the value is a participant or a session id")
    if not isinstance(secret, (bytes, bytearray)) or len(secret) < MIN_SECRET_BYTES:
        raise InputError(f"the pseudonym secret must be at least {MIN_SECRET_BYTES} bytes",
                         fix="load it with walkcomfort.imagery.privacy.load_secret")
    msg = kind.encode() + b"\x00" + str(value).strip().encode("utf-8")
    digest = hmac.new(bytes(secret), msg, hashlib.sha256).hexdigest()
    return prefixes[kind] + digest[:PSEUDONYM_HEX].upper()


def great_circle_m(lat1, lon1, lat2, lon2) -> np.ndarray:
    """Great-circle distance by the haversine formula [m] (mean Earth radius).

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : array_like
        Positions [°] WGS84 (broadcast together).
    """
    p1, p2 = np.radians(np.asarray(lat1, float)), np.radians(np.asarray(lat2, float))
    dphi = p2 - p1
    dlmb = np.radians(np.asarray(lon2, float) - np.asarray(lon1, float))
    a = np.sin(dphi / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dlmb / 2) ** 2
    return 2 * EARTH_RADIUS_M * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))


def trim_mask(lat, lon, radius_m: float = TRIM_RADIUS_M, order=None) -> np.ndarray:
    """Points to remove: those within ``radius_m`` of the track's first or last point.

    Parameters
    ----------
    lat, lon : array_like
        Track positions [°] (NaN allowed: such points are marked for removal too).
    radius_m : float
        Radius around the start and the end [m], ≥ 0.
    order : array_like, optional
        Sort key (e.g. times) that defines which points are first and last; default
        the given order.

    Returns
    -------
    numpy.ndarray of bool
        True where a point lies within the radius of the start or the end.
    """
    if not (isinstance(radius_m, (int, float)) and math.isfinite(radius_m) and radius_m >= 0):
        raise InputError(f"trim radius {radius_m!r} m must be a number >= 0", fix="give e.g. 200")
    la = np.asarray(lat, dtype=float)
    lo = np.asarray(lon, dtype=float)
    ok = np.isfinite(la) & np.isfinite(lo)
    drop = ~ok
    if not ok.any():
        return drop
    idx = np.flatnonzero(ok)
    if order is not None:
        key = np.asarray(order)[idx]
        idx = idx[np.argsort(key, kind="stable")]
    first, last = idx[0], idx[-1]
    near = (great_circle_m(la[first], lo[first], la, lo) <= radius_m) | \
        (great_circle_m(la[last], lo[last], la, lo) <= radius_m)
    return drop | (near & ok)


# --- TOML out ------------------------------------------------------------------------------

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_key(k: str) -> str:
    return k if _BARE_KEY.match(k) else _toml_str(k)


def _toml_str(s: str) -> str:
    import json

    # a JSON string is a valid TOML basic string (same escapes, \uXXXX included)
    return json.dumps(s, ensure_ascii=False)


def _toml_value(v) -> str:
    import datetime as dt

    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _toml_str(v)
    if isinstance(v, (dt.datetime, dt.date, dt.time)):
        return v.isoformat()
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def _is_table_array(v) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def to_toml(data: dict) -> str:
    """Serialise a parsed TOML document (as :mod:`tomllib` returns it) back to TOML text.

    Comments are not kept (there are none in a parsed document) — deliberately, for a
    shared copy: a comment may hold a name. Round trip: ``tomllib.loads(to_toml(d)) == d``.
    """
    lines: list[str] = []

    def emit(table: dict, path: list[str], header: str | None):
        scalars = [(k, v) for k, v in table.items() if not isinstance(v, dict) and not _is_table_array(v)]
        subtables = [(k, v) for k, v in table.items() if isinstance(v, dict)]
        arrays = [(k, v) for k, v in table.items() if _is_table_array(v)]
        # a table holding only sub-tables needs no header of its own ([devices] before [devices.gps1])
        if header is not None and (scalars or not (subtables or arrays)):
            if lines:
                lines.append("")
            lines.append(header)
        for k, v in scalars:
            lines.append(f"{_toml_key(k)} = {_toml_value(v)}")
        for k, v in subtables:
            p = path + [k]
            emit(v, p, "[" + ".".join(_toml_key(x) for x in p) + "]")
        for k, items in arrays:
            p = path + [k]
            for item in items:
                emit(item, p, "[[" + ".".join(_toml_key(x) for x in p) + "]]")

    emit(data, [], None)
    return "\n".join(lines) + "\n"
