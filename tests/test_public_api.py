"""The public API an integrator starts from: ``from advisory import ...``."""

from __future__ import annotations

import subprocess
import sys
from importlib import resources
from pathlib import Path

import pytest

import advisory
from advisory import Advisor, AdvisorConfig, AirDataState, load_table, load_zones
from advisory.schema import ADV_STATUSES, CONFLICT_STATUSES

ZONES = Path(__file__).parent / "data" / "zones_fictional_valley.geojson"

#: Speed of sound above 11 km in the U.S. Standard Atmosphere 1976 (isothermal layer at
#: 216.65 K), m/s: value from the standard's tables.
SOUND_SPEED_45K_FT_MPS = 295.07
KT_MPS = 1852.0 / 3600.0  #: one knot, m/s (international nautical mile, exact by definition)


def fields(mach: float) -> dict[str, float]:
    """Level flight at 45,000 ft heading east, 25 km west of the invented town zone
    'brackenford' (lon -101.20 to -100.90 at lat 39.93) of the test zone file."""
    return {"lat_deg": 39.93, "lon_deg": -101.5, "alt_ft": 45000.0, "mach": mach,
            "heading_deg": 90.0, "gs_kt": mach * SOUND_SPEED_45K_FT_MPS / KT_MPS,
            "bank_deg": 0.0, "fpa_deg": 0.0}


def test_all_names_resolve() -> None:
    for name in advisory.__all__:
        assert getattr(advisory, name) is not None, name
    assert "CAUTION" in advisory.SAFETY_CAUTION and "not certified" in advisory.SAFETY_CAUTION
    assert set(advisory.__all__) <= set(dir(advisory))
    with pytest.raises(AttributeError, match="no_such_name"):
        advisory.no_such_name  # noqa: B018 - the attribute access is the test


def test_integrator_first_step(small_table_path) -> None:
    # The module docstring's example: table, zones, one state in, one advisory out.
    advisor = Advisor(load_table(small_table_path), load_zones(ZONES), AdvisorConfig())
    adv = advisor.step(AirDataState.from_fields(fields(1.6), rx_monotonic=0.0),
                       now_monotonic=0.0)
    assert adv.status in ADV_STATUSES
    # Mach 1.6 at 45,000 ft is above the standard-atmosphere cutoff Mach (about 1.15 there,
    # value from memory), so the boom reaches the ground; flying straight at a zone 25 km
    # ahead puts the carpet on it within the look-ahead (common practice, no source).
    assert adv.status in CONFLICT_STATUSES
    assert adv.zone_id == "brackenford"
    assert advisory.SAFETY_CAUTION in adv.to_record().values()


def test_subsonic_flight_makes_no_boom(small_table_path) -> None:
    # Below Mach 1 no shock wave forms, so no boom reaches the ground (textbook fact,
    # value from memory).
    advisor = Advisor(load_table(small_table_path), load_zones(ZONES))
    adv = advisor.step(AirDataState.from_fields(fields(0.9), rx_monotonic=0.0),
                       now_monotonic=0.0)
    assert adv.status == "no_boom"


@pytest.mark.parametrize("module", ["advisory"])
def test_import_stays_light(module: str) -> None:
    # `import advisory` must not load numba: an integrator's start-up time (project rule,
    # no source). The CLI imports its commands' modules at the top (about 0.8 s for
    # `boom-advisory --help` on the development machine).
    code = f"import sys, {module}; print('numba' in sys.modules)"
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60, check=False)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "False"


def test_package_is_marked_typed() -> None:
    # PEP 561: a package that ships its type hints carries a `py.typed` marker file.
    assert resources.files("advisory").joinpath("py.typed").is_file()
