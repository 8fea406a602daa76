"""Which reference-level sets an audit compares with (pure): one jurisdiction, one issuing body.

A radiation-protection committee compares its rooms with the national levels of its own
country; mixing the levels of two bodies (a UK head level beside an Australian neck level)
reads as one standard when it is not. So an audit uses:

1. the sets named explicitly (``kerma audit --reference``, or ``[audit] reference_sets``), in
   that order; else
2. the verified sets of one jurisdiction (``[audit] jurisdiction = "GB"``, ISO 3166-1
   alpha-2) that are in force during the audit period; else
3. with no configuration, the verified sets in force of the single issuing body whose newest
   such set is the newest (ties: the body's name), named in the summary.

Sets of another body fill gaps only when configured (``[audit] fallback = ["AU"]``, countries
or set ids); every row compared with a fallback set says so (``reference_scope_note``).
A set is in force when its effective date is on or before the last day of the period and its
``valid_to`` (if any) is on or after the first day; a superseded set is used only when named.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from .errors import ConfigError

__all__ = ["ReferenceChoice", "choose_reference_sets", "is_in_force"]


@dataclass(frozen=True)
class ReferenceChoice:
    """The chosen sets in order of precedence, and how they were chosen."""

    primary: list[str]
    fallback: list[str] = field(default_factory=list)
    body: str = ""           # issuing body (or bodies) of the primary sets, for the summary
    basis: str = ""          # how they were chosen, in words

    @property
    def ordered(self) -> list[str]:
        return self.primary + self.fallback


def _start(date: str) -> str:
    """'2022' -> '2022-01-01'; '2022-11' -> '2022-11-01' (first day the text can mean)."""
    return date + "-01-01"[len(date) - 4:] if len(date) < 10 else date


def _end(date: str) -> str:
    """'2018' -> '2018-12-31'; '2018-11' -> '2018-11-31' (compares correctly as text)."""
    return date + "-12-31"[len(date) - 4:] if len(date) < 10 else date


def is_in_force(set_row: dict, first: dt.date, last: dt.date) -> bool:
    """True if the set's validity (effective_date .. valid_to) overlaps [first, last]."""
    effective, valid_to = set_row.get("effective_date"), set_row.get("valid_to")
    if effective and _start(str(effective)) > last.isoformat():
        return False
    return not valid_to or _end(str(valid_to)) >= first.isoformat()


def _newest_first(rows: list[dict]) -> list[dict]:
    return sorted(rows, key=lambda r: (_start(str(r.get("effective_date") or "0000")), r["set_id"]),
                  reverse=True)


def _of_country(sets: list[dict], country: str, first: dt.date, last: dt.date) -> list[dict]:
    return _newest_first([s for s in sets if s.get("all_verified") and s.get("country") == country
                          and is_in_force(s, first, last)])


def choose_reference_sets(sets: list[dict], first: dt.date, last: dt.date, *,
                          explicit: list[str] | None = None, jurisdiction: str | None = None,
                          fallback: list[str] | tuple[str, ...] = ()) -> ReferenceChoice:
    """Choose the reference sets of an audit of the days `first`..`last` (inclusive).

    Parameters
    ----------
    sets : list of dict
        One dict per set in the warehouse: set_id, issuing_body, country, effective_date,
        valid_to, origin (shipped | imported | derived), all_verified.
    first, last : datetime.date
        First and last day of the audit period.
    explicit : list of str, optional
        Set ids named by the user, in order of precedence; used as given (even if superseded).
    jurisdiction : str, optional
        ISO 3166-1 alpha-2 country whose in-force verified sets to use.
    fallback : sequence of str
        Countries or set ids whose sets fill gaps after the primary sets.

    Returns
    -------
    ReferenceChoice

    Raises
    ------
    ConfigError
        An unknown set id, or a jurisdiction with no verified set in force in the period
        (the message names the superseded sets and what to do).
    """
    by_id = {s["set_id"]: s for s in sets}
    unknown = [s for s in (explicit or []) if s not in by_id]
    if unknown:
        raise ConfigError(f"unknown reference set(s): {', '.join(unknown)}; "
                          f"available: {', '.join(sorted(by_id))}")
    if explicit:
        primary = list(explicit)
        basis = "named by the user"
    elif jurisdiction:
        chosen = _of_country(sets, jurisdiction, first, last)
        if not chosen:
            old = [s["set_id"] for s in sets if s.get("country") == jurisdiction]
            raise ConfigError(
                f"no verified reference set of jurisdiction {jurisdiction} is in force between "
                f"{first} and {last}" + (f" (superseded or unverified: {', '.join(sorted(old))})"
                                         if old else "")
                + "; import the current national set with `kerma reference import`, or name a "
                  "set with --reference")
        primary = [s["set_id"] for s in chosen]
        basis = f"jurisdiction {jurisdiction}"
    else:
        candidates = _newest_first([s for s in sets if s.get("all_verified") and
                                    s.get("origin", "shipped") == "shipped" and
                                    is_in_force(s, first, last)])
        if not candidates:
            return ReferenceChoice([], basis="no verified set in force")
        body = candidates[0]["issuing_body"]
        primary = [s["set_id"] for s in candidates if s["issuing_body"] == body]
        basis = "default: the newest verified sets in force of one issuing body"
    fallback_ids: list[str] = []
    for item in fallback:
        if item in by_id:
            ids = [item]
        else:
            ids = [s["set_id"] for s in _of_country(sets, item, first, last)]
            if not ids:
                raise ConfigError(f"fallback {item!r} is neither a set id nor a jurisdiction with "
                                  f"a verified set in force between {first} and {last}")
        fallback_ids += [i for i in ids if i not in primary and i not in fallback_ids]
    bodies = []
    for set_id in primary:
        body_name = by_id[set_id].get("issuing_body") or set_id
        if body_name not in bodies:
            bodies.append(body_name)
    return ReferenceChoice(primary, fallback_ids, "; ".join(bodies), basis)
