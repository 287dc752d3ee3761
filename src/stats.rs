//! Streaming statistics.
