"""The words pointsift writes: statuses, quadrants, coincident roles, directions.

Every module that writes or compares one of these words imports it from here,
so a word is spelled once. They are plain strings (not :class:`enum.Enum`
members) because they go straight into GeoPackage columns, CSV files and JSON.

Examples
--------
>>> STATUSES
('suspect', 'review', 'ok', 'unscreened')
>>> direction_words(90.0)
'west-east'
>>> direction_words(22.5, form="strips")
'strips along azimuth 22.5°, numbered towards 112.5°'
"""

from __future__ import annotations

__all__ = [
    "SUSPECT",
    "REVIEW",
    "OK",
    "UNSCREENED",
    "STATUSES",
    "FLAGGED",
    "QUADRANT_WORDS",
    "ROLE_ALONE",
    "ROLE_AGREES",
    "ROLE_CONTRADICTED",
    "ROLE_SUPPORTED",
    "ROLE_UNDECIDED",
    "COINCIDENT_ROLES",
    "direction_words",
]

#: Status words, most serious first (the ``screen_status`` column).
SUSPECT = "suspect"
REVIEW = "review"
OK = "ok"
UNSCREENED = "unscreened"
STATUSES: tuple[str, ...] = (SUSPECT, REVIEW, OK, UNSCREENED)
#: The statuses that ask a person to look.
FLAGGED: tuple[str, ...] = (SUSPECT, REVIEW)

#: Local Moran's I quadrant number -> words (the ``local_moran_quadrant`` column).
QUADRANT_WORDS: dict[int, str] = {
    1: "high among high",
    2: "low among high",
    3: "low among low",
    4: "high among low",
}

#: Roles of a record at a spot shared with other records (the ``coincident_role`` column).
ROLE_ALONE = ""
ROLE_AGREES = "agrees"
ROLE_CONTRADICTED = "contradicted"
ROLE_SUPPORTED = "supported"
ROLE_UNDECIDED = "undecided"
COINCIDENT_ROLES: tuple[str, ...] = (ROLE_ALONE, ROLE_AGREES, ROLE_CONTRADICTED, ROLE_SUPPORTED, ROLE_UNDECIDED)


_NAMED = {
    90.0: ("west-east", "W-E", "south to north"),
    0.0: ("south-north", "S-N", "west to east"),
    45.0: ("south-west to north-east", "SW-NE", "south-east to north-west"),
    135.0: ("south-east to north-west", "SE-NW", "south-west to north-east"),
}


def direction_words(direction: float | None, form: str = "short") -> str:
    """Plain words for a direction (an azimuth in degrees, clockwise from grid north; axial, so 270 is 90).

    The one place direction words are made (strips, lag pairs, variograms,
    reports and the command line).

    Parameters
    ----------
    direction : float or None
        Azimuth in degrees; None means every direction.
    form : {"short", "abbrev", "strip", "strips", "label"}
        ``"short"``: ``"west-east"``; ``"abbrev"``: ``"W-E"``; ``"strip"``:
        ``"west-east strip"``; ``"strips"``: ``"west-east strips, numbered
        south to north"``; ``"label"``: the bare azimuth (``"90"``,
        ``"22.5"``, ``"all"``), for tables and keys.

    Returns
    -------
    str
    """
    if form not in ("short", "abbrev", "strip", "strips", "label"):
        raise ValueError(f"form {form!r} is not known; choose one of short, abbrev, strip, strips, label.")
    if direction is None:
        return "all" if form in ("label", "abbrev") else "all directions"
    if form == "label":
        return f"{float(direction):g}"
    axial = float(direction) % 180.0
    named = _NAMED.get(axial)
    if form == "short":
        return named[0] if named else f"azimuth {axial:g}\N{DEGREE SIGN}"
    if form == "abbrev":
        return named[1] if named else f"azimuth {axial:g}"
    if form == "strip":
        return f"{named[0]} strip" if named else f"strip along {axial:g}\N{DEGREE SIGN}"
    if named:
        return f"{named[0]} strips, numbered {named[2]}"
    return (f"strips along azimuth {axial:g}\N{DEGREE SIGN}, "
            f"numbered towards {(axial - 90) % 180:g}\N{DEGREE SIGN}")
