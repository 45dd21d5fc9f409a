"""Prometheus metrics of the live service, on a registry of its own (tests make a fresh one each).

Names carry the `frontwatch_` prefix and base units; counters end in `_total`, durations are
histograms in seconds. Per-station ages are computed when /metrics is scraped, not on a timer.
"""

from __future__ import annotations

import time
from collections.abc import Iterable

from prometheus_client import CollectorRegistry, Counter, Gauge, Histogram
from prometheus_client.core import GaugeMetricFamily
from prometheus_client.registry import Collector

# Per-record core time is microseconds; observation-to-event latency is milliseconds to seconds.
_PROC_BUCKETS = (2e-6, 5e-6, 1e-5, 2e-5, 5e-5, 1e-4, 2e-4, 5e-4, 1e-3, 5e-3, 0.02, 0.1)
_LAT_BUCKETS = (0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0)


class _StationAges(Collector):
    """Seconds since each station's last record arrived, and how old that record's own time is."""

    def __init__(self, metrics: ServiceMetrics) -> None:
        self.m = metrics

    def collect(self) -> Iterable[GaugeMetricFamily]:
        now = time.time()
        seen = GaugeMetricFamily("frontwatch_station_last_seen_seconds",
                                 "Seconds since the station's last accepted record arrived", labels=["station"])
        age = GaugeMetricFamily("frontwatch_station_observation_age_seconds",
                                "Wall clock minus the observation time of the station's newest record",
                                labels=["station"])
        for st, (wall, obs_t) in sorted(self.m.station_seen.items()):
            seen.add_metric([st], now - wall)
            age.add_metric([st], now - obs_t)
        yield seen
        yield age


class ServiceMetrics:
    """All metrics of one service instance."""

    def __init__(self, registry: CollectorRegistry | None = None) -> None:
        r = self.registry = registry if registry is not None else CollectorRegistry()
        self.messages = Counter("frontwatch_messages_received", "MQTT messages received on the observation topics",
                                registry=r)
        self.records = Counter("frontwatch_records_received", "Observation records decoded and passed to the core",
                               registry=r)
        self.refused = Counter("frontwatch_records_refused", "Records refused before the core, by reason",
                               ["reason"], registry=r)
        self.qc_flags = Counter("frontwatch_qc_flags", "Quality-control flags raised by the core, by reason",
                                ["reason"], registry=r)
        self.events = Counter("frontwatch_events", "Passage events found, by kind", ["kind"], registry=r)
        self.outputs = Counter("frontwatch_outputs_published", "Outputs published to the broker, by type",
                               ["type"], registry=r)
        self.unknown = Counter("frontwatch_unknown_station_records",
                               "Records from stations not in the network file", registry=r)
        self.queue_depth = Gauge("frontwatch_queue_depth", "Messages waiting for the core", registry=r)
        self.dropped = Counter("frontwatch_queue_dropped_messages",
                               "Messages dropped (oldest first) because the queue was full", registry=r)
        self.connected = Gauge("frontwatch_broker_connected", "1 while connected to the broker", registry=r)
        self.reconnects = Counter("frontwatch_broker_reconnects", "Connections made after the first one",
                                  registry=r)
        self.snapshots = Counter("frontwatch_snapshots", "Core snapshots written to the store", registry=r)
        self.webhooks = Counter("frontwatch_webhook_deliveries", "Alert webhook deliveries, by outcome (sent/failed/dropped)",
                                ["outcome"], registry=r)
        self.processing = Histogram("frontwatch_record_processing_seconds",
                                    "Core time per record (decode excluded), averaged over each batch of messages",
                                    buckets=_PROC_BUCKETS, registry=r)
        self.latency = Histogram("frontwatch_observation_to_event_seconds",
                                 "From arrival of the message that caused an output to its acknowledged publish",
                                 buckets=_LAT_BUCKETS, registry=r)
        self.station_seen: dict[str, tuple[float, float]] = {}
        r.register(_StationAges(self))
