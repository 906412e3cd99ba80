//! Climate drivers: the common time grid, psychrometrics (FAO-56 vapour
//! pressure, VPD, dew point), day and night, and the plant-relevant indicators
//! (cold hours, degree days, daily light integral, ...) per sensor and day.
//!
//! It consumes the clean readings table of [`crate::io`] and produces daily
//! values that [`crate::spatial`] maps onto pots.
