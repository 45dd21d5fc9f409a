"""Render an alert message as OASIS Common Alerting Protocol 1.2 XML (xml.etree, no extra dependency).

Element order follows the CAP 1.2 schema (alert: identifier, sender, sent, status, msgType, source?,
scope, ..., references?; info: language, category, event, responseType?, urgency, severity,
certainty, ..., onset?, expires?, senderName?, headline, description, instruction, contact?,
parameter*, area). Times carry a numeric offset ("+00:00"), as CAP 1.2 requires ("Z" is not
allowed). `references` is "sender,identifier,sent" of the message this one updates.
The cautions of DOMAIN.md section 6 go into <instruction>.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from datetime import UTC, datetime
from typing import Any

from ..timeutil import parse_time
from .lifecycle import CAUTIONS

CAP_NS = "urn:oasis:names:tc:emergency:cap:1.2"
STATUS = ("Actual", "Exercise", "System", "Test", "Draft")
MSG_TYPES = ("Alert", "Update", "Cancel", "Ack", "Error")
SCOPES = ("Public", "Restricted", "Private")
CATEGORIES = ("Geo", "Met", "Safety", "Security", "Rescue", "Fire", "Health", "Env", "Transport", "Infra",
              "CBRNE", "Other")
URGENCY = ("Immediate", "Expected", "Future", "Past", "Unknown")
SEVERITY = ("Extreme", "Severe", "Moderate", "Minor", "Unknown")
CERTAINTY = ("Observed", "Likely", "Possible", "Unlikely", "Unknown")
DEFAULT_SENDER = "frontwatch@localhost"
AREA_RADIUS_KM = 2.0
EXPIRES_AFTER_S = 3 * 3600.0


def cap_time(t: float) -> str:
    """Epoch seconds -> CAP dateTime with a numeric offset, e.g. 2026-01-14T02:45:00+00:00."""
    return datetime.fromtimestamp(int(t), UTC).isoformat()


def _iso_to_cap(text: str | None) -> str | None:
    return None if text is None else cap_time(parse_time(text))


def _sub(parent: ET.Element, tag: str, text: str | None = None) -> ET.Element:
    el = ET.SubElement(parent, f"{{{CAP_NS}}}{tag}")
    if text is not None:
        el.text = text
    return el


def _check(value: str, allowed: tuple[str, ...], name: str) -> str:
    if value not in allowed:
        raise ValueError(f"CAP {name} {value!r} is not one of {allowed}")
    return value


def to_cap(alert: dict[str, Any], *, sender: str = DEFAULT_SENDER, status: str = "Actual") -> ET.Element:
    """The CAP <alert> element for one alert dict (AlertMessage.to_dict()).

    `status` is CAP's: 'Actual' for a live service, 'Exercise' or 'Test' for demos and drills.
    """
    ET.register_namespace("", CAP_NS)
    root = ET.Element(f"{{{CAP_NS}}}alert")
    sent = _iso_to_cap(alert["issued_at"])
    assert sent is not None
    _sub(root, "identifier", alert["message_id"])
    _sub(root, "sender", sender)
    _sub(root, "sent", sent)
    _sub(root, "status", _check(status, STATUS, "status"))
    _sub(root, "msgType", _check(alert["msg_type"], MSG_TYPES, "msgType"))
    _sub(root, "scope", "Public")
    if alert.get("references"):
        ref_sent = _iso_to_cap(alert.get("references_issued_at")) or sent
        _sub(root, "references", f"{sender},{alert['references']},{ref_sent}")
    info = _sub(root, "info")
    _sub(info, "language", "en")
    _sub(info, "category", "Met")
    _sub(info, "event", "Sea-breeze front")
    state = alert["state"]
    _sub(info, "responseType", "AllClear" if state in ("clear", "cancelled") else "Monitor")
    _sub(info, "urgency", _check(alert["urgency"], URGENCY, "urgency"))
    _sub(info, "severity", _check(alert["severity"], SEVERITY, "severity"))
    _sub(info, "certainty", _check(alert["certainty"], CERTAINTY, "certainty"))
    onset = _iso_to_cap(alert.get("eta"))
    if onset is not None:
        _sub(info, "onset", onset)
    _sub(info, "expires", cap_time(parse_time(alert["issued_at"]) + EXPIRES_AFTER_S))
    _sub(info, "senderName", "frontwatch (decision support, not an official warning)")
    _sub(info, "headline", alert["headline"])
    desc = alert.get("description") or ""
    if alert.get("data_warnings"):
        desc = (desc + " Data warnings: " + "; ".join(alert["data_warnings"]) + ".").strip()
    _sub(info, "description", desc)
    _sub(info, "instruction", " ".join(CAUTIONS))
    if alert.get("contacts"):
        _sub(info, "contact", ", ".join(alert["contacts"]))
    params = [("frontwatch_state", state), ("frontwatch_seq", str(alert["seq"])), ("frontwatch_basis", alert["basis"])]
    for key in ("eta_earliest", "eta_latest"):
        v = _iso_to_cap(alert.get(key))
        if v is not None:
            params.append((f"frontwatch_{key}", v))
    for e in alert.get("thresholds_exceeded", []):
        params.append((f"frontwatch_expected_{e['quantity']}", f"{e['expected']} {e['unit']} (limit {e['limit']})"))
    for name, value in params:
        p = _sub(info, "parameter")
        _sub(p, "valueName", name)
        _sub(p, "value", value)
    area = _sub(info, "area")
    _sub(area, "areaDesc", alert.get("site_name") or alert["site"])
    _sub(area, "circle", f"{alert['lat']:.5f},{alert['lon']:.5f} {AREA_RADIUS_KM:g}")
    return root


def to_cap_xml(alert: dict[str, Any], **kw: Any) -> str:
    """CAP 1.2 XML text (UTF-8 declaration included) for one alert dict."""
    root = to_cap(alert, **kw)
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True)
