"""CAP 1.2 rendering against the standard's required elements and enumerations.

Reference: OASIS Common Alerting Protocol Version 1.2 (2010), as summarised in DOMAIN.md section 4:
alert(identifier, sender, sent, status, msgType, scope) and info(category, event, urgency, severity,
certainty) and area(areaDesc) are required; the enumerations below are the standard's. The element
order checked is that of the CAP 1.2 XML schema (from memory of the schema's sequence).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from typing import Any

import pytest

from frontwatch.alerts.cap import CAP_NS, to_cap_xml
from frontwatch.alerts.lifecycle import CAUTIONS, SiteAlerts
from frontwatch.config import SiteConfig
from frontwatch.network.forecast import Expected, SiteForecast

NS = {"cap": CAP_NS}
STATUS = {"Actual", "Exercise", "System", "Test", "Draft"}
MSG_TYPES = {"Alert", "Update", "Cancel", "Ack", "Error"}
SCOPE = {"Public", "Restricted", "Private"}
URGENCY = {"Immediate", "Expected", "Future", "Past", "Unknown"}
SEVERITY = {"Extreme", "Severe", "Moderate", "Minor", "Unknown"}
CERTAINTY = {"Observed", "Likely", "Possible", "Unlikely", "Unknown"}
# CAP 1.2 dateTime: no 'Z'; a numeric offset is required (e.g. 2002-05-24T16:49:00-07:00).
CAP_TIME = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d$")
ALERT_ORDER = ["identifier", "sender", "sent", "status", "msgType", "source", "scope", "restriction", "addresses",
               "code", "note", "references", "incidents", "info"]
INFO_ORDER = ["language", "category", "event", "responseType", "urgency", "severity", "certainty", "audience",
              "eventCode", "effective", "onset", "expires", "senderName", "headline", "description", "instruction",
              "web", "contact", "parameter", "resource", "area"]

NOW = 1_800_000_000.0
SITE = SiteConfig.model_validate({"id": "green", "name": "Green festival ground", "lat": -27.4, "lon": 153.0,
                                  "gust_limit_ms": 12.0, "contacts": ["safety desk, channel 3"]})


def _messages() -> list[dict[str, Any]]:
    a = SiteAlerts(SITE, station="S30")

    def fc(t: float, lead: float | None, status: str = "expected") -> SiteForecast:
        eta = None if lead is None else t + lead * 60
        return SiteForecast("green", t, "S01-20270101T0100Z", status, eta, None if eta is None else eta - 300,
                            None if eta is None else eta + 300, 2.5, 270.0, "fit", 4, 0.2, 3.0, 50.0,
                            Expected(95.0, 5.0, 14.0, -2.0), None if status != "not_expected" else "stalled")

    out = []
    for t, f in ((NOW, fc(NOW, 60)), (NOW + 2700, fc(NOW + 2700, 15)), (NOW + 3600, fc(NOW + 3600, None, "not_expected"))):
        m = a.step(t, f, last_seen=t)
        assert m is not None
        out.append(m.to_dict())
    return out


def _children(el: ET.Element) -> list[str]:
    return [c.tag.split("}", 1)[1] for c in el]


@pytest.mark.parametrize("i", [0, 1, 2])
def test_required_elements_enumerations_and_order(i: int) -> None:
    msgs = _messages()
    xml = to_cap_xml(msgs[i], sender="frontwatch@example.invalid", status="Exercise")
    root = ET.fromstring(xml)
    assert root.tag == f"{{{CAP_NS}}}alert"
    names = _children(root)
    for req in ("identifier", "sender", "sent", "status", "msgType", "scope"):
        assert names.count(req) == 1, req
    assert names == sorted(names, key=ALERT_ORDER.index)
    assert root.findtext("cap:status", namespaces=NS) in STATUS
    assert root.findtext("cap:msgType", namespaces=NS) in MSG_TYPES
    assert root.findtext("cap:scope", namespaces=NS) in SCOPE
    assert CAP_TIME.match(root.findtext("cap:sent", namespaces=NS) or "")
    info = root.find("cap:info", NS)
    assert info is not None
    inames = _children(info)
    for req in ("category", "event", "urgency", "severity", "certainty"):
        assert inames.count(req) == 1, req
    assert inames == sorted(inames, key=INFO_ORDER.index)
    assert info.findtext("cap:category", namespaces=NS) == "Met"
    assert info.findtext("cap:urgency", namespaces=NS) in URGENCY
    assert info.findtext("cap:severity", namespaces=NS) in SEVERITY
    assert info.findtext("cap:certainty", namespaces=NS) in CERTAINTY
    for tag in ("onset", "expires", "effective"):
        v = info.findtext(f"cap:{tag}", namespaces=NS)
        if v is not None:
            assert CAP_TIME.match(v), (tag, v)
    area = info.find("cap:area", NS)
    assert area is not None and area.findtext("cap:areaDesc", namespaces=NS) == "Green festival ground"
    circle = area.findtext("cap:circle", namespaces=NS) or ""
    assert re.match(r"^-?\d+\.\d+,-?\d+\.\d+ \d+(\.\d+)?$", circle)
    # The cautions of DOMAIN.md section 6 are in the instruction.
    instr = info.findtext("cap:instruction", namespaces=NS) or ""
    for c in CAUTIONS:
        assert c in instr
    assert "official warnings" in instr and "stale" in instr


def test_message_types_and_references_follow_the_lifecycle() -> None:
    msgs = _messages()
    roots = [ET.fromstring(to_cap_xml(m)) for m in msgs]
    assert [r.findtext("cap:msgType", namespaces=NS) for r in roots] == ["Alert", "Update", "Cancel"]
    assert roots[0].find("cap:references", NS) is None
    ref = roots[2].findtext("cap:references", namespaces=NS) or ""
    sender, ident, sent = ref.split(",")
    assert sender == "frontwatch@localhost" and ident == msgs[1]["message_id"]
    assert sent == "2027-01-15T08:45:00+00:00"  # the referenced message's own 'sent' (NOW + 2700 s)
    idents = [r.findtext("cap:identifier", namespaces=NS) for r in roots]
    assert len(set(idents)) == 3  # each message its own identifier
    # Identifiers must not contain spaces, commas or restricted characters (CAP 1.2, 3.2.1).
    assert all(i and not re.search(r"[\s,<&]", i) for i in idents)
    assert roots[1].find("cap:info/cap:urgency", NS).text == "Immediate"  # type: ignore[union-attr]
    sev = roots[0].findtext("cap:info/cap:severity", namespaces=NS)
    assert sev == "Moderate"  # gusts of 14 m/s against a 12 m/s limit


def test_bad_values_are_refused() -> None:
    m = _messages()[0]
    with pytest.raises(ValueError, match="status"):
        to_cap_xml(m, status="Real")
    with pytest.raises(ValueError, match="urgency"):
        to_cap_xml({**m, "urgency": "Soon"})
