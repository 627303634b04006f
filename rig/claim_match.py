"""How a claim or return number is matched to the claims on record.

A claim is kept exactly as it was given and ``rig runs --claim`` finds it exactly; but two
claims that differ in letter case or spaces alone (``RMA 7`` and ``rma7``) are very likely one
return typed twice, so where one is looked up the other is named beside it, as it is stored."""

from __future__ import annotations


def claim_key(claim: str) -> str:
    """``claim`` with its letter case and spaces left out: what two claims typed differently
    have in common."""
    return "".join(claim.split()).lower()
