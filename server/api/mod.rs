//! The JSON API under `/api/v1`, for scripts. Handlers are thin: they read JSON or query
//! parameters, call the same layers as the pages (`catalog`, `relations`, `fit`) and answer JSON
//! whose keys carry their units. Every error is RFC 9457 problem details ([`problem`]).

pub mod problem;
pub mod submissions;
