//! The spatial engine: correlation families, experimental variograms,
//! variogram model fitting, kriging onto pots, the mapping of sensor time series
//! through time, and leave-one-sensor-out cross-validation.
//!
//! Its numeric kernel is shared by the whole crate: [`covariance`] (the one
//! covariance model and matrix fill), [`factor`] (the one dense
//! factorisation path: Cholesky, whitening, log-determinant, least squares
//! with one rank tolerance) and [`optimise`] (the one simplex optimiser).
//!
//! It owns geometry and spatial statistics only. It consumes the regular
//! sensor series and indicator definitions of [`crate::climate`] and is used by
//! [`crate::model`] (which shares [`correlation`]) and [`crate::simulate`].

pub mod anisotropy;
pub mod ascent;
pub mod ascent_scores;
pub mod averaged;
pub mod config;
pub mod correlation;
pub mod covariance;
pub mod distances;
pub mod drift;
pub mod error;
pub mod exposure;
pub mod factor;
pub mod geometry;
pub mod indicator_route;
pub mod kriging;
pub mod likelihood;
pub mod mapping;
pub mod noise;
pub mod optimise;
pub mod outputs;
pub mod pair_bins;
pub mod paths;
pub mod placement;
pub mod profile_route;
pub mod rowcol;
pub mod selfcheck;
pub mod spectral;
pub mod stage;
mod stage_check;
pub mod variogram;
pub mod variogram_pooled;
pub mod vecchia;
pub mod vecchia_latent;
pub mod vecchia_order;
pub mod vecchia_scores;
pub mod vecchia_search;
pub mod window_se;
