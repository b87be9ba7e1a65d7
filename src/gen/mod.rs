//! Test-signal synthesis (`brink gen`).
