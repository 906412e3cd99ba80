//! Rendering of results into tables and the self-contained HTML report. It
//! renders; it never computes.
