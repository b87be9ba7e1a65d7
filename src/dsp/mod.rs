//! Pure numeric code: no threads, devices, files or screens.

pub mod ballistics;
pub mod clip;
pub mod imd;
pub mod level;
pub mod sinefit;
pub mod spectrum;
pub mod tone;
pub mod truepeak;
pub mod window;
