//! massline: a research group's catalog of supermassive black holes and their host galaxies,
//! with the black-hole–host scaling relations (M–σ, M_BH–M_bulge, M_BH–L) fitted from it.
//!
//! The layers, from the bottom up (arrows point one way; DEVELOPERS.md has the map):
//!
//! * [`units`]: the quantities, their plausible ranges and the parser for values as people type
//!   them. Depends on nothing else here.
//! * [`astro`]: constants and astrophysical formulas (sphere of influence, distance rescaling,
//!   AGN quantities). Pure functions.
//! * [`fit`]: the statistics (estimators of the scaling relations). Pure, synchronous, no I/O.
//! * [`charts`]: plotters to SVG strings; pure functions of plain data.
//! * [`catalog`]: the only module with SQL: galaxies, measurements, submissions, accounts,
//!   sessions, tokens, audit events.
//! * [`relations`]: the scaling relations the catalog supports, fit samples built from the
//!   adopted values (rescaled to the adopted distance, distance errors and covariances), and
//!   the fit cache keyed by catalog version.
//! * [`export`]: files for papers and astronomy software (VOTable, LaTeX tables, a methods
//!   paragraph) written from a fit or the adopted catalog. Pure functions.
//! * [`auth`]: roles, sessions, API tokens, password rules and the layers that authenticate
//!   every request and refuse forged ones.
//! * [`web`]: HTML pages; thin handlers over the layers above. [`api`]: the JSON API.
//! * [`startup`] and [`config`]: settings, building and running the server.
//! * [`cli`]: the `massline` command line (serve, fit, user, import, export, backup); like
//!   [`web`] and [`api`] a door over the layers above, which may start the assembled server.

pub mod api;
pub mod astro;
pub mod auth;
pub mod catalog;
pub mod charts;
pub mod cli;
pub mod config;
pub mod error;
pub mod export;
pub mod fit;
pub mod relations;
pub mod router;
pub mod startup;
pub mod state;
pub mod units;
pub mod web;

pub use config::Settings;
pub use startup::Application;
