"""Per-site alert lifecycle and its renderings: JSON (schema.py), CAP 1.2 XML (cap.py), webhooks."""
