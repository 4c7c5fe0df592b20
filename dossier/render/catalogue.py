"""The catalogue index: one row per system, and the search index its page script reads.

The search index is built here, at build time, as a small JavaScript file
(``search-index.js``) rather than JSON: pages opened from a USB stick
(``file://``) may not fetch JSON, but they may load a script. It maps each
word of a system's id, title, component and pair ids and notes to the
systems that contain it; the page script matches typed words as prefixes.
"""

from __future__ import annotations

import json
import re
from typing import Any

import numpy as np

#: Claim grades that settle a claim; the others count as open.
SETTLED_GRADES = ("confirmed", "refuted")


def last_observed(result) -> tuple[float, str] | None:
    """(Julian year, the epoch as logged) of the latest measure in any of the system's logs."""
    latest = None
    for log in result.facts.logs.values():
        for t, measure in zip(log.t, log.measures):
            if latest is None or float(t) > latest[0]:
                latest = (float(t), str(measure.epoch))
    return latest


def latest_o_minus_c(result) -> dict[str, Any] | None:
    """The largest O−C of a pair's latest unflagged measure against its orbit posterior, in σ (None without one).

    σ combines the measure's uncertainty with the spread of the prediction
    (:func:`dossier.ephemerides.o_minus_c`): a large value says the orbit no
    longer describes the pair, or the measure is wrong.
    """
    from dossier.ephemerides import o_minus_c

    worst = None
    for pid, log in result.facts.logs.items():
        posterior = result.facts.ephemeris_posterior(pid)
        keep = ~log.flagged
        if posterior is None or not keep.any():
            continue
        k = int(np.flatnonzero(keep)[np.argmax(log.t[keep])])
        d_theta, d_rho, z = o_minus_c(posterior, log.t[k:k + 1], log.rho[k:k + 1], log.theta[k:k + 1],
                                      log.sigma_rho[k:k + 1], log.sigma_theta[k:k + 1])
        row = {"pair": pid, "z": round(float(z[0]), 2), "d_theta": float(d_theta[0]), "d_rho": float(d_rho[0]),
               "epoch": str(log.measures[k].epoch)}
        if worst is None or row["z"] > worst["z"]:
            worst = row
    return worst


def system_row(result, history: dict[str, Any]) -> dict[str, Any]:
    """What the catalogue table shows of one system, with the values its columns sort by."""
    system = result.system
    grades = [a for a in result.assessments if a.grade is not None]
    seen = last_observed(result)
    releases = history.get("releases", [])
    return {
        "id": system.id,
        "title": system.title,
        "result": result,
        "history": history,
        "statuses": sorted({v.status for v in result.verdicts.values()}),
        "components": len(system.components),
        "last_observed": seen[1] if seen else None,
        "last_observed_year": round(seen[0], 4) if seen else None,
        "latest_release": releases[-1] if releases else None,
        "open_claims": [a.subject for a in grades if a.grade not in SETTLED_GRADES],
        "o_minus_c": latest_o_minus_c(result),
    }


def _words(text: str) -> set[str]:
    """Lower-case words of a text; ids such as 'heron-1' or 'Ba-Bb' are kept whole as well as split."""
    text = re.sub(r"[*_`#>\[\]()]", " ", text.lower())  # Markdown punctuation
    words = set(re.findall(r"[0-9a-z\u00c0-\u024f]+", text))
    words |= {w.strip(".,;:") for w in text.split() if "-" in w and len(w) > 2}
    return {w for w in words if w}


def search_text(result) -> str:
    """Everything the search box looks at for one system."""
    system = result.system
    parts = [system.id, system.title, system.notes or ""]
    for cid, component in system.components.items():
        parts += [cid, component.note or "", component.spectral_type or ""]
    for pair in system.pairs:
        parts += [pair.id, pair.note or ""]
    parts += [c.companion for c in system.claims]
    return " ".join(parts)


def search_index_js(rows: list[dict[str, Any]]) -> str:
    """``search-index.js``: ``window.DOSSIER_SEARCH = {"systems": [...], "words": {word: [row, ...]}}``."""
    words: dict[str, list[int]] = {}
    for i, row in enumerate(rows):
        # a row of the incremental build carries its system's text already (dossier.site.system_unit)
        text = row["search_text"] if "search_text" in row else search_text(row["result"])
        for word in sorted(_words(text)):
            words.setdefault(word, []).append(i)
    doc = {"systems": [row["id"] for row in rows], "words": dict(sorted(words.items()))}
    # ASCII only (so U+2028 and U+2029 are escapes, as older parsers need), and '<', '>', '&' as \u escapes: they
    # occur only inside strings, so the file cannot end a <script> element or open an HTML comment even if
    # it is ever inlined in a page, and stays the same JavaScript value.
    text = json.dumps(doc, ensure_ascii=True, separators=(",", ":"), sort_keys=True)
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    return ("// Built by dossier: the words of each system's id, title, components, pairs and notes.\n"
            f"window.DOSSIER_SEARCH = {text};\n")
