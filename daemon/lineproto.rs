//! InfluxDB line protocol.
