"""Small OpenDRIVE documents for the tests, written as text (invented roads)."""

from __future__ import annotations

from pathlib import Path

ROUTES = Path(__file__).resolve().parent.parent / "routes"
DEMO = ROUTES / "proving_ground.xodr"


def lanes(width: float = 3.5, right: int = 1, left: int = 1, extra_right: str = "",
          lane_offset: str = "") -> str:
    """A lane block: ``left`` and ``right`` driving lanes of ``width`` metres."""
    def one(i):
        return (f'<lane id="{i}" type="driving"><width sOffset="0" a="{width!r}" b="0" c="0" '
                f'd="0"/>{extra_right if i == -1 else ""}</lane>')
    left_xml = "".join(one(i) for i in range(left, 0, -1))
    right_xml = "".join(one(-i) for i in range(1, right + 1))
    return (f"<lanes>{lane_offset}<laneSection s=\"0\"><left>{left_xml}</left>"
            f"<center><lane id=\"0\" type=\"none\"/></center><right>{right_xml}</right>"
            "</laneSection></lanes>")


def road(rid, geometries: str, length: float, links: str = "", profile: str = "",
         lane_xml: str | None = None, extra: str = "", junction: str = "-1") -> str:
    """One ``<road>``; ``geometries`` is the inside of ``<planView>``."""
    return (f'<road id="{rid}" length="{length!r}" junction="{junction}">'
            f"<link>{links}</link>{extra}<planView>{geometries}</planView>{profile}"
            f"{lane_xml if lane_xml is not None else lanes()}</road>")


def geometry(s, x, y, hdg, length, inner: str) -> str:
    return (f'<geometry s="{s!r}" x="{x!r}" y="{y!r}" hdg="{hdg!r}" length="{length!r}">'
            f"{inner}</geometry>")


def document(*roads: str, header: str = "", junctions: str = "") -> str:
    return ('<?xml version="1.0" encoding="UTF-8"?>\n<OpenDRIVE>\n'
            f'<header revMajor="1" revMinor="6" name="test">{header}</header>\n'
            + "\n".join(roads) + f"\n{junctions}</OpenDRIVE>\n")


def write(tmp_path: Path, text: str, name: str = "road.xodr") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path
