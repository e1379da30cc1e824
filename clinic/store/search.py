"""Finding women: spelling-tolerant names (rapidfuzz), exact register numbers and phone digits."""
from __future__ import annotations

import re
import unicodedata
from typing import Iterable

from rapidfuzz import fuzz

_NON_ALNUM = re.compile(r"[^0-9a-z]+")
# Shorter digit strings match too much to count as "the same phone".
MIN_PHONE_DIGITS = 7
NAME_CUTOFF = 80


def normalise_name(name: str | None) -> str:
    """Case, accents, punctuation and spacing removed: "  Ámína  O'Neil " -> "amina o neil"."""
    if not name:
        return ""
    s = unicodedata.normalize("NFKD", str(name))
    s = "".join(c for c in s if not unicodedata.combining(c)).casefold()
    return _NON_ALNUM.sub(" ", s).strip()


def name_score(a: str, b: str) -> float:
    """0-100; word order does not matter ("Juma Amina" = "Amina Juma")."""
    if not a or not b:
        return 0.0
    return fuzz.token_sort_ratio(a, b)


def phone_digits(phone: str | None) -> str:
    return re.sub(r"\D", "", phone or "")


def phones_match(a: str, b: str) -> bool:
    """Same digits, or the same last digits when one carries a country code (+254 7.. / 07..)."""
    if len(a) < MIN_PHONE_DIGITS or len(b) < MIN_PHONE_DIGITS:
        return False
    if a == b:
        return True
    a9, b9 = a[-9:], b[-9:]
    return len(a9) == 9 and a9 == b9


def _word_score(query: str, name: str) -> float:
    """Each query word against its best-matching word of the name, averaged: "amna" ~ "amina"."""
    words = name.split()
    if not words:
        return 0.0
    qwords = query.split()
    return sum(max(fuzz.ratio(q, w) for w in words) for q in qwords) / len(qwords)


def search(women: Iterable[dict], text: str) -> list[dict]:
    """Exact register number or phone first; then names scored by similarity (>= 80 of 100).

    A query shorter than a whole name matches the words it has ("amina" finds "Amina Juma").
    """
    q = (text or "").strip()
    if not q:
        return []
    women = list(women)
    qn = normalise_name(q)
    qd = phone_digits(q)
    exact = [w for w in women if w.get("register_no") and w["register_no"].strip().casefold() == q.casefold()]
    if len(qd) >= MIN_PHONE_DIGITS and len(qd) >= len(q.replace(" ", "")) - 2:
        exact += [w for w in women if w not in exact and phones_match(qd, phone_digits(w.get("phone")))]
    scored = []
    if qn and not qn.isdigit():
        for w in women:
            if w in exact:
                continue
            n = normalise_name(w.get("name"))
            score = max(fuzz.token_sort_ratio(qn, n), _word_score(qn, n))
            if score >= NAME_CUTOFF:
                scored.append((score, w))
    scored.sort(key=lambda t: -t[0])
    return exact + [w for _, w in scored]
