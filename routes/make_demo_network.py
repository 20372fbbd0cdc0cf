"""Regenerate the invented demo road network ``proving_ground.xodr`` (ASAM OpenDRIVE 1.6).

Run from the repository root::

    python routes/make_demo_network.py

Everything here is invented: a small proving ground designed from scratch in this script (no
survey or map data), placed with a geoReference at an arbitrary point in open ocean, matching
no real site. Roads:

* road 1, "handling course": straight, a left curve of R 50 m between 40 m clothoids, a lane
  change to the left and back (a normalized paramPoly3 and a poly3), a right curve of R 35 m
  between 30 m clothoids, a straight; rising then easing in elevation; two lane sections (the
  right lane narrows from 3.5 to 3.0 m in the second); 60 km/h;
* junction 100 at its end: connecting road 10 straight on, connecting road 11 turning right
  (R 15 m);
* road 2, "banked curve": a 180-degree left turn of R 90 m between 50 m clothoids, banked
  toward its inside (roll angle up to 0.08 rad, ramped along the clothoids); 25 m/s;
* road 3, "side exit": a straight, 25 mph, with a lane speed record of 8 m/s on its second half.

Each element's start point and heading are the end of the one before, integrated here with
scipy's adaptive quadrature (independent of curvespeed's own evaluation, which the tests then
compare against). Output is deterministic (fixed number format, ``\\n`` line ends).
"""

from __future__ import annotations

import math
from pathlib import Path

from scipy.integrate import quad

HERE = Path(__file__).resolve().parent
OUT = HERE / "proving_ground.xodr"
#: Arbitrary origin in open ocean for the geoReference (no real site).
GEO_REFERENCE = ("+proj=tmerc +lat_0=-47.5 +lon_0=-135.25 +k=1 +x_0=0 +y_0=0 +ellps=WGS84 "
                 "+units=m +no_defs")
_QUAD = dict(epsabs=1e-12, epsrel=1e-13, limit=200)


def _f(v: float) -> str:
    return f"{v:.17e}"


def _end_of(x, y, hdg, kind, length, params):
    """End point and heading of one element (quadrature of its tangent)."""
    if kind in ("line", "arc", "spiral"):
        k0, k1 = params

        def theta(s):
            return hdg + k0 * s + 0.5 * (k1 - k0) / length * s * s
        dx = quad(lambda s: math.cos(theta(s)), 0, length, **_QUAD)[0]
        dy = quad(lambda s: math.sin(theta(s)), 0, length, **_QUAD)[0]
        return x + dx, y + dy, theta(length)
    u_coef, v_coef, p_end = params
    u = sum(c * p_end**i for i, c in enumerate(u_coef))
    v = sum(c * p_end**i for i, c in enumerate(v_coef))
    du = sum(i * c * p_end ** (i - 1) for i, c in enumerate(u_coef) if i)
    dv = sum(i * c * p_end ** (i - 1) for i, c in enumerate(v_coef) if i)
    c, s = math.cos(hdg), math.sin(hdg)
    return x + c * u - s * v, y + s * u + c * v, hdg + math.atan2(dv, du)


def _cubic_length(u_coef, v_coef, p_end):
    def speed(p):
        du = sum(i * c * p ** (i - 1) for i, c in enumerate(u_coef) if i)
        dv = sum(i * c * p ** (i - 1) for i, c in enumerate(v_coef) if i)
        return math.hypot(du, dv)
    return quad(speed, 0, p_end, **_QUAD)[0]


def plan(x, y, hdg, elements):
    """``<geometry>`` lines for elements (kind, length or None, params), chained; returns the
    lines, the end pose and the road length."""
    lines, s = [], 0.0
    for kind, length, params in elements:
        if kind == "paramPoly3":
            u_coef, v_coef = params
            length = _cubic_length(u_coef, v_coef, 1.0)
            inner = ("<paramPoly3 " + " ".join(f'{n}U="{_f(c)}"' for n, c in zip("abcd", u_coef))
                     + " " + " ".join(f'{n}V="{_f(c)}"' for n, c in zip("abcd", v_coef))
                     + ' pRange="normalized"/>')
            end = _end_of(x, y, hdg, kind, length, (u_coef, v_coef, 1.0))
        elif kind == "poly3":
            u_end, v_coef = params
            length = _cubic_length((0.0, 1.0), v_coef, u_end)
            inner = "<poly3 " + " ".join(f'{n}="{_f(c)}"' for n, c in zip("abcd", v_coef)) + "/>"
            end = _end_of(x, y, hdg, kind, length, ((0.0, 1.0), v_coef, u_end))
        else:
            k0, k1 = params
            inner = {"line": "<line/>", "arc": f'<arc curvature="{_f(k0)}"/>',
                     "spiral": f'<spiral curvStart="{_f(k0)}" curvEnd="{_f(k1)}"/>'}[kind]
            end = _end_of(x, y, hdg, kind, length, params)
        lines.append(f'      <geometry s="{_f(s)}" x="{_f(x)}" y="{_f(y)}" hdg="{_f(hdg)}" '
                     f'length="{_f(length)}">{inner}</geometry>')
        s += length
        x, y, hdg = end
    return lines, (x, y, hdg), s


def lane(lane_id, kind, widths, pred=None, succ=None, speeds=()):
    link = ""
    if pred is not None or succ is not None:
        link = ("<link>" + (f'<predecessor id="{pred}"/>' if pred is not None else "")
                + (f'<successor id="{succ}"/>' if succ is not None else "") + "</link>")
    w = "".join(f'<width sOffset="{_f(o)}" a="{_f(a)}" b="{_f(b)}" c="{_f(c)}" d="{_f(d)}"/>'
                for o, a, b, c, d in widths)
    sp = "".join(f'<speed sOffset="{_f(o)}" max="{v:g}" unit="{u}"/>' for o, v, u in speeds)
    return f'          <lane id="{lane_id}" type="{kind}" level="false">{link}{w}{sp}</lane>'


def section(s, left, right):
    return ([f'      <laneSection s="{_f(s)}">', "        <left>", *left, "        </left>",
             "        <center>", '          <lane id="0" type="none" level="false"/>',
             "        </center>", "        <right>", *right, "        </right>",
             "      </laneSection>"])


def road(rid, name, length, junction, links, geometry, profile, lanes, speed):
    out = [f'  <road name="{name}" length="{_f(length)}" id="{rid}" junction="{junction}" '
           'rule="RHT">', "    <link>", *links, "    </link>"]
    if speed:
        out.append(f'    <type s="0" type="{speed[0]}"><speed max="{speed[1]:g}" '
                   f'unit="{speed[2]}"/></type>')
    out += ["    <planView>", *geometry, "    </planView>", *profile, "    <lanes>", *lanes,
            "    </lanes>", "  </road>"]
    return out


def records(tag, name, rows):
    body = [f'      <{name} s="{_f(s)}" a="{_f(a)}" b="{_f(b)}" c="{_f(c)}" d="{_f(d)}"/>'
            for s, a, b, c, d in rows]
    return [f"    <{tag}>", *body, f"    </{tag}>"]


W = (0.0, 3.5, 0.0, 0.0, 0.0)
#: Right lanes after the narrowing on road 1 (through the junction and beyond).
W3 = (0.0, 3.0, 0.0, 0.0, 0.0)


def build() -> str:
    # road 1: the handling course
    g1, end1, len1 = plan(0.0, 0.0, 0.0, [
        ("line", 80.0, (0.0, 0.0)), ("spiral", 40.0, (0.0, 1 / 50)), ("arc", 60.0, (1 / 50,) * 2),
        ("spiral", 40.0, (1 / 50, 0.0)),
        ("paramPoly3", None, ((0.0, 60.0, 0.0, 0.0), (0.0, 0.0, 9.0, -6.0))),
        ("poly3", None, (60.0, (0.0, 0.0, -9.0 / 3600, 6.0 / 216000))),
        ("spiral", 30.0, (0.0, -1 / 35)), ("arc", 50.0, (-1 / 35,) * 2),
        ("spiral", 30.0, (-1 / 35, 0.0)), ("line", 60.0, (0.0, 0.0))])
    narrowing = (0.0, 3.5, 0.0, -3 * 0.5 / 30**2, 2 * 0.5 / 30**3)
    lanes1 = [*section(0.0, [lane(1, "driving", [W], None, 1)],
                       [lane(-1, "driving", [W], None, -1),
                        lane(-2, "shoulder", [(0, 1.0, 0, 0, 0)])]),
              *section(200.0, [lane(1, "driving", [W], 1, None)],
                       [lane(-1, "driving", [narrowing, (30.0, 3.0, 0, 0, 0)], -1, None),
                        lane(-2, "shoulder", [(0, 1.0, 0, 0, 0)])])]
    elev1 = records("elevationProfile", "elevation",
                    [(0.0, 20.0, 0.01, 0.0, 0.0), (250.0, 22.5, 0.01, -1e-4, 0.0)])
    out = ['<?xml version="1.0" encoding="UTF-8"?>', "<OpenDRIVE>",
           '  <header revMajor="1" revMinor="6" name="Invented proving ground (demo)" '
           'version="1" vendor="curvespeed demo generator">',
           f"    <geoReference><![CDATA[{GEO_REFERENCE}]]></geoReference>", "  </header>"]
    out += road(1, "handling course", len1, -1,
                ['      <successor elementType="junction" elementId="100"/>'], g1,
                elev1 + ["    <lateralProfile/>"], lanes1, ("rural", 60, "km/h"))
    # connecting roads of junction 100, level at the height where road 1 ends
    x, y, h = end1
    z_end = 22.5 + 0.01 * (len1 - 250.0) - 1e-4 * (len1 - 250.0) ** 2
    level = records("elevationProfile", "elevation", [(0.0, z_end, 0, 0, 0)])
    g10, end10, len10 = plan(x, y, h, [("line", 20.0, (0.0, 0.0))])
    g11, end11, len11 = plan(x, y, h, [("arc", 15 * math.pi / 2, (-1 / 15,) * 2)])
    for rid, g, length, to in ((10, g10, len10, 2), (11, g11, len11, 3)):
        out += road(rid, f"connector to road {to}", length, 100,
                    ['      <predecessor elementType="road" elementId="1" contactPoint="end"/>',
                     f'      <successor elementType="road" elementId="{to}" '
                     'contactPoint="start"/>'],
                    g, level, section(0.0, [], [lane(-1, "driving", [W3], -1, -1)]), None)
    # road 2: the banked curve
    spiral_turn = 50.0 / (2 * 90.0)
    arc_len = 90.0 * (math.pi - 2 * spiral_turn)
    g2, _, len2 = plan(*end10, [("line", 40.0, (0.0, 0.0)), ("spiral", 50.0, (0.0, 1 / 90)),
                                ("arc", arc_len, (1 / 90,) * 2), ("spiral", 50.0, (1 / 90, 0.0)),
                                ("line", 40.0, (0.0, 0.0))])
    bank = -0.08               # falls to the left, toward the inside of the left turn
    roll = [(0.0, 0.0, 0, 0, 0), (40.0, 0.0, bank / 50, 0, 0), (90.0, bank, 0, 0, 0),
            (90.0 + arc_len, bank, -bank / 50, 0, 0), (140.0 + arc_len, 0.0, 0, 0, 0)]
    out += road(2, "banked curve", len2, -1,
                ['      <predecessor elementType="junction" elementId="100"/>'], g2,
                level + records("lateralProfile", "superelevation", roll),
                section(0.0, [lane(1, "driving", [W])], [lane(-1, "driving", [W3], -1, None)]),
                ("rural", 25, "m/s"))
    # road 3: the side exit
    g3, _, len3 = plan(*end11, [("line", 120.0, (0.0, 0.0))])
    out += road(3, "side exit", len3, -1,
                ['      <predecessor elementType="junction" elementId="100"/>'], g3, level,
                section(0.0, [lane(1, "driving", [W])],
                        [lane(-1, "driving", [W3], -1, None, [(60.0, 8, "m/s")])]),
                ("town", 25, "mph"))
    out += ['  <junction name="crossing" id="100">',
            '    <connection id="0" incomingRoad="1" connectingRoad="10" contactPoint="start">'
            '<laneLink from="-1" to="-1"/></connection>',
            '    <connection id="1" incomingRoad="1" connectingRoad="11" contactPoint="start">'
            '<laneLink from="-1" to="-1"/></connection>',
            "  </junction>", "</OpenDRIVE>", ""]
    return "\n".join(out)


if __name__ == "__main__":
    OUT.write_text(build(), encoding="utf-8", newline="\n")
    print(f"wrote {OUT.name}")
