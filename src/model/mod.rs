//! Trait models: the factorial design, OLS with ANOVA tables, GLS with
//! spatially correlated residuals by REML and ML, information criteria and
//! residual diagnostics (Moran's I, residual variograms).
//!
//! It uses the correlation families of [`crate::spatial::correlation`].

pub mod compare;
