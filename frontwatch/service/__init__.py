"""The async shell around the pure core: MQTT in and out, web page and metrics, SQLite store."""
