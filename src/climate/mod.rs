//! Climate drivers: the common time grid, psychrometrics (FAO-56 vapour
//! pressure, VPD, dew point), day and night, and the plant-relevant indicators
//! (cold hours, degree days, daily light integral, ...) per sensor and day.
//!
//! It consumes the clean readings table of [`crate::io`] and produces daily
//! values that [`crate::spatial`] maps onto pots.
//!
//! Layout, and what the spatial engine calls:
//! * [`config`]: `[climate]` and `[[indicator]]`, validated once.
//! * [`calendar`]: the grid, local days, expected steps per day, day flags.
//! * [`regular`]: polars bucketing of readings onto the grid, gap filling,
//!   and the time × sensor matrices ([`regular::SensorGrid`]).
//! * [`indicator`]: per-day values from ONE location's series
//!   ([`indicator::daily_values`]) and their combination over a window
//!   ([`indicator::combine_window`]); plain slices, no polars, so they are
//!   cheap to call on every pot's mapped series.
//! * [`exceedance`]: threshold indicators as expectations over a kriged
//!   value's Gaussian predictive distribution.
//! * [`psychro`]: FAO-56 psychrometrics.
//! * [`stage`]: the `climate` stage end to end and its output files.
//!
//! Inside the module, dependencies run one way: `config` (what was declared)
//! ← `calendar` (the grid and day rule) ← `indicator` (the computation; it
//! also says how each declared statistic combines over a window) ← `stage`.

pub mod calendar;
pub mod config;
pub mod error;
pub mod exceedance;
pub mod indicator;
pub mod intervals;
pub mod psychro;
pub mod regular;
pub mod stage;

pub use calendar::Calendar;
pub use config::{ClimateConfig, Indicator};
pub use error::{ClimateError, Result};
pub use indicator::{
    Combine, DayValue, LocationSeries, WindowValue, combine_own_variance, combine_window, daily_values,
    daily_values_expected, daily_values_expected_over,
};
pub use regular::{SensorGrid, StepMatrix};
pub use stage::{ClimateRun, compute, run};
