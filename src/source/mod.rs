//! Where samples come from.
