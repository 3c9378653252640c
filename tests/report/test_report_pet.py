"""``report --index pet``: the session report draws PET with its classes instead of UTCI with its bands."""

from __future__ import annotations

import base64
import re

from walkcomfort.cli import main
from walkcomfort.environment import pet as P
from walkcomfort.report import session_figures as F


def test_session_report_with_pet(tmp_path, fixtures_dir, artifacts_dir):
    out = tmp_path / "out"
    assert main(["ingest", str(fixtures_dir / "sessions" / "walk_ok"), "-o", str(out)]) == 0
    assert main(["thermal", str(out)]) == 0  # no PET in the timeline: the report computes it
    assert main(["report", str(out), "--index", "pet", "-o", str(tmp_path / "pet.html")]) == 0
    assert main(["report", str(out), "-o", str(tmp_path / "utci.html")]) == 0
    pet, utci = ((tmp_path / f"{n}.html").read_text(encoding="utf-8") for n in ("pet", "utci"))
    assert "coloured by PET" in pet and "Tmrt, PET," in pet
    assert "coloured by UTCI" in utci and "Tmrt, UTCI," in utci and "Tmrt, PET," not in utci
    # keep the time series for a look (test-artifacts/)
    png = re.search(r'class="plot"[^>]*src="data:image/png;base64,([^"]+)"', pet).group(1)
    (artifacts_dir / "session_report_pet_timeseries.png").write_bytes(base64.b64decode(png))


def test_the_pet_scale_is_the_classes_and_their_colours():
    scale = F.index_scale("pet")
    assert scale["col"] == P.PET_C and [b[2] for b in scale["bands"]] == list(P.PET_CLASS_COLOURS)
    assert F.index_scale("utci")["name"] == "UTCI"
