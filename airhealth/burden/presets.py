"""Counterfactual presets: guideline and limit values to compute a burden against, each with its source.

A preset is named ``"<scheme>:<pollutant>:<averaging>"``, e.g. ``"who-guideline:pm2.5:24h"`` (the WHO 2021
guideline level for daily PM2.5), ``"who-interim-2:no2:annual"`` or ``"eu-limit:pm10:24h"``. The schemes:

* ``who-guideline`` — WHO global air quality guidelines (2021), air quality guideline (AQG) levels;
* ``who-interim-1`` … ``who-interim-4`` — the same guidelines' interim targets 1 to 4 (1 the highest);
* ``eu-limit`` — EU Directive 2008/50/EC limit values for the protection of human health;
* ``eu-target`` — EU Directive 2008/50/EC target value (ozone).

Averaging times: ``24h`` (daily mean), ``8h`` (maximum daily 8-hour mean), ``1h``, ``annual`` and
``peak-season`` (WHO ozone: the mean of daily maximum 8-hour means over the six consecutive months with the
highest six-month running mean). Values are in µg/m³ except carbon monoxide (mg/m³). The WHO converts
ppb to µg/m³ at 25 °C and 1 atm; the EU standardises gaseous pollutants at 293 K and 101.3 kPa: a preset
records its reference conditions so that :mod:`airhealth.burden.counterfactual` can convert it to an
exposure measured in ppb.

Every value was transcribed from ``references.md`` of the project (values checked against the published
texts on 2026-12-02): WHO 24-hour and 8-hour levels are 99th percentiles (3–4 exceedance days a year); EU
daily limit values allow a number of exceedances a calendar year, written in each preset's note.

References
----------
World Health Organization (2021). WHO global air quality guidelines: particulate matter (PM2.5 and PM10),
ozone, nitrogen dioxide, sulfur dioxide and carbon monoxide. Geneva: WHO.
Directive 2008/50/EC of the European Parliament and of the Council of 21 May 2008 on ambient air quality and
cleaner air for Europe. OJ L 152, 11.6.2008, Annex VII (ozone target value) and Annex XI (limit values).
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from ..errors import SpecificationError

__all__ = ["PRESETS", "Preset", "find_preset", "preset_table"]

WHO_SOURCE = "WHO global air quality guidelines 2021"
EU_SOURCE = "EU Directive 2008/50/EC"
_WHO_PERCENTILE = "99th percentile of daily values (3-4 exceedance days a year)"

AVERAGING = {
    "24h": "24-hour mean",
    "8h": "maximum daily 8-hour mean",
    "1h": "1-hour mean",
    "annual": "annual mean",
    "peak-season": "peak-season mean of daily maximum 8-hour means",
}
POLLUTANTS = {
    "pm2.5": "PM2.5",
    "pm10": "PM10",
    "o3": "O3",
    "no2": "NO2",
    "so2": "SO2",
    "co": "CO",
    "benzene": "benzene",
}
_ALIASES = {"pm25": "pm2.5", "pm2,5": "pm2.5", "ozone": "o3", "24-hour": "24h", "daily": "24h", "8-hour": "8h"}


@dataclass(frozen=True)
class Preset:
    """One guideline or limit value: what it applies to, its value and unit, and where it comes from."""

    scheme: str
    pollutant: str
    averaging: str
    value: float
    unit: str
    source: str
    note: str = ""
    reference_temperature_c: float = 25.0
    reference_pressure_kpa: float = 101.325

    @property
    def name(self) -> str:
        return f"{self.scheme}:{self.pollutant}:{self.averaging}"

    def describe(self) -> str:
        """One line: name, value, unit and source."""
        what = f"{POLLUTANTS[self.pollutant]} {AVERAGING[self.averaging]}"
        note = f"; {self.note}" if self.note else ""
        return f"{self.name}: {self.value:g} {self.unit} ({what}; {self.source}{note})"


def _who(pollutant: str, averaging: str, levels: tuple[float, ...], unit: str = "µg/m³") -> list[Preset]:
    """The AQG level (first) and interim targets 1, 2, ... of one WHO 2021 row."""
    note = _WHO_PERCENTILE if averaging in ("24h", "8h") else ""
    out = [Preset("who-guideline", pollutant, averaging, levels[0], unit, f"{WHO_SOURCE}, AQG level", note)]
    for i, value in enumerate(levels[1:], start=1):
        out.append(
            Preset(f"who-interim-{i}", pollutant, averaging, value, unit, f"{WHO_SOURCE}, interim target {i}", note)
        )
    return out


def _eu(
    scheme: str, pollutant: str, averaging: str, value: float, where: str, note: str, unit: str = "µg/m³"
) -> Preset:
    return Preset(scheme, pollutant, averaging, value, unit, f"{EU_SOURCE}, {where}", note, 20.0, 101.3)


_LIMIT = "Annex XI limit value"
#: Every preset. Values: references.md, "Standards and guideline values" (verified 2026-12-02):
#: WHO 2021 AQG level (interim targets 1→4), µg/m³ — PM2.5 annual 5 (35, 25, 15, 10), 24-hour 15 (75, 50, 37.5,
#: 25); PM10 annual 15 (70, 50, 30, 20), 24-hour 45 (150, 100, 75, 50); O3 peak season 60 (100, 70), 8-hour 100
#: (160, 120); NO2 annual 10 (40, 30, 20), 24-hour 25 (120, 50); SO2 24-hour 40 (125, 50); CO 24-hour 4 mg/m³ (7).
#: EU 2008/50/EC — NO2 1-hour 200 (≤ 18/year), annual 40; PM10 24-hour 50 (≤ 35/year), annual 40; PM2.5 annual 25;
#: SO2 1-hour 350 (≤ 24/year), 24-hour 125 (≤ 3/year); CO max daily 8-hour mean 10 mg/m³; O3 target max daily
#: 8-hour mean 120 (≤ 25 days/year averaged over three years); benzene annual 5.
PRESETS: tuple[Preset, ...] = (
    *_who("pm2.5", "annual", (5, 35, 25, 15, 10)),
    *_who("pm2.5", "24h", (15, 75, 50, 37.5, 25)),
    *_who("pm10", "annual", (15, 70, 50, 30, 20)),
    *_who("pm10", "24h", (45, 150, 100, 75, 50)),
    *_who("o3", "peak-season", (60, 100, 70)),
    *_who("o3", "8h", (100, 160, 120)),
    *_who("no2", "annual", (10, 40, 30, 20)),
    *_who("no2", "24h", (25, 120, 50)),
    *_who("so2", "24h", (40, 125, 50)),
    *_who("co", "24h", (4, 7), unit="mg/m³"),
    _eu("eu-limit", "no2", "1h", 200, _LIMIT, "not to be exceeded more than 18 times a calendar year"),
    _eu("eu-limit", "no2", "annual", 40, _LIMIT, ""),
    _eu("eu-limit", "pm10", "24h", 50, _LIMIT, "not to be exceeded more than 35 times a calendar year"),
    _eu("eu-limit", "pm10", "annual", 40, _LIMIT, ""),
    _eu("eu-limit", "pm2.5", "annual", 25, "limit value", ""),
    _eu("eu-limit", "so2", "1h", 350, _LIMIT, "not to be exceeded more than 24 times a calendar year"),
    _eu("eu-limit", "so2", "24h", 125, _LIMIT, "not to be exceeded more than 3 times a calendar year"),
    _eu("eu-limit", "co", "8h", 10, _LIMIT, "", unit="mg/m³"),
    _eu("eu-limit", "benzene", "annual", 5, _LIMIT, ""),
    _eu(
        "eu-target", "o3", "8h", 120, "Annex VII target value",
        "not to be exceeded on more than 25 days a calendar year averaged over three years",
    ),
)  # fmt: skip

_BY_NAME = {p.name: p for p in PRESETS}


def _normalise(part: str) -> str:
    key = part.strip().lower().replace(" ", "")
    return _ALIASES.get(key, key)


def find_preset(name: str) -> Preset:
    """The preset called ``name`` (``"<scheme>:<pollutant>:<averaging>"``, case and spaces ignored).

    Raises
    ------
    SpecificationError
        Naming what does not exist and listing what does: the schemes, the pollutants a scheme covers, or
        the averaging times it has for that pollutant (with their values).

    Examples
    --------
    >>> find_preset("who-guideline:pm2.5:24h").value
    15
    >>> find_preset("EU-limit:PM10:24h").note
    'not to be exceeded more than 35 times a calendar year'
    """
    parts = [_normalise(p) for p in str(name).split(":")]
    schemes = list(dict.fromkeys(p.scheme for p in PRESETS))
    if len(parts) != 3 or parts[0] not in schemes:
        raise SpecificationError(
            f"counterfactual {name!r} is neither a number nor a preset; presets are named "
            f"'<scheme>:<pollutant>:<averaging>', e.g. 'who-guideline:pm2.5:24h', with schemes "
            f"{', '.join(schemes)} (list them all with airhealth.burden.preset_table() or "
            "'airhealth burden --list-counterfactuals')."
        )
    scheme, pollutant, averaging = parts
    in_scheme = [p for p in PRESETS if p.scheme == scheme]
    for_pollutant = [p for p in in_scheme if p.pollutant == pollutant]
    if not for_pollutant:
        known = ", ".join(dict.fromkeys(p.pollutant for p in in_scheme))
        raise SpecificationError(f"preset scheme {scheme!r} has no value for pollutant {pollutant!r}; it has: {known}.")
    preset = _BY_NAME.get(f"{scheme}:{pollutant}:{averaging}")
    if preset is None:
        known = ", ".join(f"{p.averaging} ({p.value:g} {p.unit})" for p in for_pollutant)
        raise SpecificationError(
            f"preset scheme {scheme!r} has no {averaging!r} value for {pollutant!r}; it has: {known}."
        )
    return preset


def preset_table() -> pd.DataFrame:
    """Every preset as a tidy table (``name, scheme, pollutant, averaging, value, unit, source, note``)."""
    rows = [
        {
            "name": p.name,
            "scheme": p.scheme,
            "pollutant": p.pollutant,
            "averaging": p.averaging,
            "value": p.value,
            "unit": p.unit,
            "source": p.source,
            "note": p.note,
        }
        for p in PRESETS
    ]
    return pd.DataFrame(rows)
