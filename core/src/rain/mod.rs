//! Rain from gauges and IDF curves. (being written)
