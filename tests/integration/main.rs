//! brink's integration tests: one binary, shared helpers in `util`.
#![allow(clippy::unwrap_used)] // tests state their expectations by unwrapping

mod accuracy;
mod agree;
mod cli;
mod closed_form;
mod compare;
mod dashboard;
mod demo;
mod imd;
mod live;
mod servers;
mod util;
