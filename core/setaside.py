"""Set-asides, and the checks every journaled change shares.

A participant set aside stays in the study (both passes, every decision)
but is left out of the verified table, with the reason and the rule that
set them aside; :func:`restore` brings them back. Both are journaled by the
store. The checks here (a participant the study knows, a reason, the
resolver's initials, IDs compared in their canonical form) are the ones the
decisions in :mod:`core.resolution` use too; that module re-exports
:func:`set_aside`, :func:`restore`, :func:`set_aside_list` and
:func:`everyone_kept`, so callers keep importing them from there.
"""

from __future__ import annotations

import pandas as pd

from .codebook import Codebook
from .errors import DecisionError
from .values import canonical_series

SET_ASIDE_COLUMNS = ("participant", "reason", "rule", "keyer", "at")


def set_aside(study, participant: str, reason: str, keyer: str, rule: str = "") -> None:
    """Keep ``participant`` out of the analysis file, with the reason (journaled).

    ``rule`` optionally names the rule applied (e.g. ``"fewer than half answered"``)
    so the same reason is used consistently. Refused for an unknown participant.

    >>> set_aside(study, "17", "answered a different version", "LM")   # doctest: +SKIP
    """
    participant = _known_participant(study, participant)
    reason = _need_reason(reason)
    keyer = _need_keyer(keyer)
    # Setting aside again replaces the reason (the store journals both).
    study.set_aside(participant, reason, keyer, rule=str(rule or "").strip())


def restore(study, participant: str, reason: str, keyer: str) -> None:
    """Bring a set-aside participant back into the analysis file (journaled).

    >>> restore(study, "17", "set aside by mistake", "LM")   # doctest: +SKIP
    """
    participant = _canonical_id(study.codebook, participant)
    reason = _need_reason(reason)
    keyer = _need_keyer(keyer)
    if participant not in set(set_aside_list(study)["participant"].astype(str)):
        raise DecisionError(f"participant {participant} is not set aside — nothing to restore.")
    study.restore_participant(participant, reason, keyer)


def set_aside_list(study) -> pd.DataFrame:
    """Participants set aside now: participant, reason, rule, keyer, at.

    >>> set_aside_list(study)["participant"].tolist()   # doctest: +SKIP
    ['17']
    """
    table = study.set_asides()
    if table is None or table.empty:
        return pd.DataFrame(columns=SET_ASIDE_COLUMNS)
    return table.reset_index(drop=True)


def everyone_kept(study):
    """The study as if nobody were set aside: the "with them kept in" side of a comparison.

    It only answers questions (nothing is lifted in the study itself), so
    ``verified_table(everyone_kept(study), draft=True)`` is safe on a
    read-only connection.

    >>> verified_table(everyone_kept(study), draft=True).set_aside.empty   # doctest: +SKIP
    True
    """
    return _EveryoneKept(study)


class _EveryoneKept:
    def __init__(self, study):
        self._study = study

    def set_asides(self) -> pd.DataFrame:
        return pd.DataFrame(columns=SET_ASIDE_COLUMNS)

    def __getattr__(self, name):
        return getattr(self._study, name)


# --------------------------------------------------------------------------- checks


def _need_reason(reason: str) -> str:
    text = " ".join(str(reason or "").split())
    if not text:
        raise DecisionError("a decision needs a reason — pick one from the list or type one.")
    return text


def _need_keyer(keyer: str) -> str:
    text = str(keyer or "").strip()
    if not text:
        raise DecisionError("a decision needs the resolver's initials — give --keyer NAME.")
    return text


def _canonical_ids(codebook: Codebook, texts: pd.Series) -> pd.Series:
    canon, _ = canonical_series(codebook.id_variable, texts.astype(object))
    return canon.astype("string").fillna("")


def _canonical_id(codebook: Codebook, text: str) -> str:
    return str(_canonical_ids(codebook, pd.Series([str(text)], dtype=object)).iloc[0])


def _known_participant(study, participant: str) -> str:
    wanted = _canonical_id(study.codebook, participant)
    forms = study.forms()
    ids = set(_canonical_ids(study.codebook, forms["participant"])) if len(forms) else set()
    if not wanted or wanted not in ids:
        raise DecisionError(
            f'participant "{participant}" has no form in this study — check the ID.'
        )
    return wanted
