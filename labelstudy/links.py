"""Judge links and QR codes (SVG through qrcode's path image, which needs no Pillow)."""

from __future__ import annotations

import io

import qrcode
import qrcode.image.svg


def judge_url(base_url: str, token: str) -> str:
    return f"{base_url.rstrip('/')}/j/{token}"


def status_words(inv: dict, n_required: int | None = None) -> str:
    """'revoked', 'submitted', 'not started' or 'n of m answered' / 'n answered'."""
    if inv["status"] == "revoked":
        return "revoked"
    if inv["submitted_at"]:
        return "submitted"
    if not inv["n_answered"]:
        return "not started"
    if n_required:
        return f"{inv['n_answered']} of {n_required} answered"
    return f"{inv['n_answered']} answered"


def qr_svg(url: str) -> str:
    """An SVG QR code for ``url`` (a complete <svg> element, no XML prolog)."""
    img = qrcode.make(url, image_factory=qrcode.image.svg.SvgPathImage, box_size=10, border=2)
    buf = io.BytesIO()
    img.save(buf)
    svg = buf.getvalue().decode("utf-8")
    if svg.startswith("<?xml"):
        svg = svg[svg.index("?>") + 2:].lstrip()
    return svg


def judge_links(store, base_url: str, *, study_id: int | None = None,
                round_number: int | None = None) -> list[dict]:
    """Every invitation as {study_id, round, judge_id, name, email, status, link, last_activity}."""
    out = []
    for rnd in store.list_rounds(study_id):
        if round_number is not None and rnd["number"] != round_number:
            continue
        for inv in store.invitations(rnd["id"]):
            out.append({"study_id": rnd["study_id"], "round": rnd["number"], "judge_id": inv["judge_id"],
                        "name": inv["display_name"], "email": inv["email"], "status": status_words(inv),
                        "link": judge_url(base_url, inv["token"]), "last_activity": inv["last_activity_at"]})
    return out
