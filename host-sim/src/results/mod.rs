//! What a run means: [`metrics`] measures each setpoint step with pi-core's one
//! step-metrics routine and checks it with pi-core's one rule for a limit;
//! [`summary`] gathers every figure a report states on every tick (so a thinned
//! trace changes none); [`report`] runs a scenario and makes the table and the
//! JSON; [`compare`] sets a bench capture beside the simulation driven the same
//! way.

pub mod compare;
pub mod expect;
pub mod html;
pub mod metrics;
pub mod plan;
pub mod protections;
pub mod report;
mod report_page;
pub mod summary;
