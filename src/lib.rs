//! lifedata: life data analysis inside SQLite.
//!
//! Rows of unit lives (age, failed) go in through an aggregate; a fitted
//! life model comes out as JSON text; scalar functions read the model
//! (percentile life, reliability, hazard, conditional failure probability,
//! optimal replacement age). Data flows one way through the layers:
//! `sample` -> `fit` -> `model` -> readers in `dist` and `decide`; the `sql`
//! layer only registers functions and translates arguments and errors.
//! The loadable extension itself lives in the `lifedata-ext` package.

pub mod decide;
pub mod dist;
pub mod error;
pub mod fit;
pub mod model;
pub mod plot;
pub mod sample;
pub mod sql;
mod sql_aggregate;
pub mod sql_forecast;
pub mod sql_tables;
pub mod usage;

pub use error::{LifeError, LifeResult};
pub use model::Model;
pub use sql::register;
