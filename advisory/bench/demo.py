"""The bundled demo flights: where they are (installed or in a checkout) and their order.

The demo flights are invented scenarios over invented geography (fictional towns and
parks over open ocean around 30 N 140 W), flown by the fictional demo aircraft. Each
directory holds the record file, its zones, a small table grid, the atmosphere when it is
not the standard one, and the expected advisories. In the repository they live in
``replay_logs/`` at the top; a wheel ships the same files as ``advisory/demo_flights``
(see ``pyproject.toml``). ``boom-advisory demo`` (:mod:`advisory.cli.demo`) replays them.

Nothing here writes into the package directory: tables go to the user cache
(:mod:`advisory.tables.cache`), reports to the directory the user names.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from advisory.bench.scenario import SCENARIO_FILE
from advisory.tomlfile import tomllib

#: Where an installed package keeps the demo flights (``advisory/demo_flights``).
INSTALLED_NAME = "demo_flights"
#: Where a checkout keeps them (``replay_logs/`` beside the package).
CHECKOUT_FLIGHTS = Path(__file__).resolve().parents[2] / "replay_logs"


def demo_flights_dir() -> Path:
    """The bundled demo flights: the installed copy, else the checkout's ``replay_logs``."""
    installed = resources.files("advisory") / INSTALLED_NAME
    if installed.is_dir():
        return Path(str(installed))
    return CHECKOUT_FLIGHTS


def demo_flights(root: str | Path | None = None) -> list[Path]:
    """The scenario directories under ``root`` (default: the bundled ones), in their
    ``order``.

    Raises
    ------
    ValueError
        When ``root`` holds no scenario (the message names the directory).
    """
    root = Path(root) if root is not None else demo_flights_dir()
    if not root.is_dir():
        raise ValueError(f"--logs: {root} is not a directory (the demo flights live in "
                         "replay_logs/ of a boom-advisory checkout)")
    found = []
    for d in sorted(root.iterdir()):
        f = d / SCENARIO_FILE
        if f.is_file():
            try:
                order = tomllib.loads(f.read_text(encoding="utf-8")).get("order", 99)
            except (OSError, tomllib.TOMLDecodeError) as exc:
                raise ValueError(f"scenario file {f}: cannot read ({exc})") from exc
            found.append((order, d.name, d))
    if not found:
        raise ValueError(f"--logs: no scenario directories (with scenario.toml) in {root}")
    return [d for _, _, d in sorted(found)]
