"""Units written the way radio astronomers write them: Jy/beam km/s, mJy/beam, K km/s.

astropy writes ``Jy km / (beam s)`` for an integrated intensity; papers and
observatory products write ``Jy/beam km/s`` (common practice). `unit_text`
gives that form for display and tables; values keep their astropy units.

Examples
--------
>>> import astropy.units as u
>>> unit_text(u.Jy / u.beam * u.km / u.s), unit_text(u.mJy / u.beam), unit_text(u.K * u.km / u.s)
('Jy/beam km/s', 'mJy/beam', 'K km/s')
"""

import astropy.units as u

__all__ = ["unit_text"]

_PER = ((u.beam, "beam"), (u.pix, "pixel"))
_SPEEDS = ((u.km, "km/s"), (u.m, "m/s"))
_BRIGHTNESS = {"spectral flux density", "temperature"}


def _power(p):
    return "" if p == 1 else f"{p:g}"


def unit_text(unit):
    """``unit`` as the trade writes it: brightness first, then ``/beam`` or ``/pixel``, then the velocity unit.

    Parameters
    ----------
    unit : astropy unit or str

    Returns
    -------
    str
        ``""`` for a dimensionless unit.

    Examples
    --------
    >>> import astropy.units as u
    >>> unit_text("Jy km / (beam s)"), unit_text(u.K * u.km / u.s * u.pc**2)
    ('Jy/beam km/s', 'K km/s pc2')
    """
    unit = u.Unit(unit)
    if unit == u.dimensionless_unscaled:
        return ""
    powers = dict(zip(unit.bases, unit.powers))
    speed = ""
    for length, text in _SPEEDS:
        if powers.get(length) == 1 and powers.get(u.s) == -1:
            del powers[length], powers[u.s]
            speed = text
            break
    per = []
    for base, text in _PER:
        if powers.get(base) == -1:
            del powers[base]
            per.append(text)
    # Brightness (flux density or temperature) and its /beam first, then the velocity, then the rest.
    bright = [b for b in powers if str(b.physical_type) in _BRIGHTNESS]
    others = [b for b in powers if b not in bright]
    head = _join(bright, powers)
    if unit.scale != 1:
        head = f"{unit.scale:g} {head}".strip()
    if per:
        head = (head or "1") + "".join(f"/{p}" for p in per)
    return " ".join(part for part in (head, speed, _join(others, powers)) if part)


def _join(bases, powers):
    up = [f"{b.to_string()}{_power(powers[b])}" for b in bases if powers[b] > 0]
    down = [f"/{b.to_string()}{_power(-powers[b])}" for b in bases if powers[b] < 0]
    return " ".join(up) + "".join(down)
