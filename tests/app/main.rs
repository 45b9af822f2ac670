//! Black-box tests of the real server: each test starts the app on 127.0.0.1:0 with a fresh
//! temporary SQLite file (see helpers.rs) and talks HTTP to it.

#[path = "../common/mod.rs"]
mod common;
mod helpers;

mod access;
mod accounts;
mod agn_doors;
mod agn_relations;
mod analysis;
mod api;
mod api_fuzz;
mod bulge_ratio;
mod catalog_search;
mod changes;
mod demo_agn;
mod exports;
mod galaxy_names;
mod galaxy_relations;
mod history;
mod idempotency;
mod kinematics;
mod pages;
mod planning;
mod planning_core;
mod relations;
mod runs;
mod security;
mod sessions;
mod storage;
mod submissions;
mod virial;
