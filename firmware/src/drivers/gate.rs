//! Gate actuator (being written).
