//! The spatial engine: correlation families, experimental variograms,
//! variogram model fitting, kriging onto pots, the mapping of sensor time series
//! through time, and leave-one-sensor-out cross-validation.
//!
//! It owns geometry and spatial statistics only. It consumes the regular
//! sensor series and indicator definitions of [`crate::climate`] and is used by
//! [`crate::model`] (which shares [`correlation`]) and [`crate::simulate`].

pub mod config;
pub mod correlation;
pub mod drift;
pub mod error;
pub mod geometry;
pub mod kriging;
pub mod likelihood;
pub mod mapping;
pub mod outputs;
pub mod selfcheck;
pub mod stage;
pub mod variogram;
