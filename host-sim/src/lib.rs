//! # host-sim: the host side of Ampwright
//!
//! The simulator runs the real `pi-core` current loop against models of the
//! motor and the drive chain, on an ordinary computer, so that a current loop can
//! be checked on every commit without hardware; and it designs PI gains for a
//! scenario with `pi_core::design`.
//!
//! ```text
//! scenario file (TOML) -> scenario::Params (validated; gains optional) -> scenario::build -> blocks + LoopConfig
//!                                 |                                                   |
//!          tuning (basis, survey) |                        sim::runner --tick--> pi_core::CurrentLoop (the real one)
//!                                 |                                                   |  plant: motor, bridge, sense chain,
//!             prepare: the one joint (load, override, fill gains)                     |  timing, fault injectors
//!                                                                                     v
//!                              sim::trace -> results (metrics, verdict, report) -> plot (SVG) / table / JSON / CSV
//! ```
//!
//! * [`plant`]: the blocks, one file each, each stepped over an interval with
//!   its inputs held; none knows the controller, the scenario, the results or
//!   the plots.
//! * [`sim`]: the runner that steps them and calls the controller at each
//!   sampling instant, and the trace it leaves.
//! * [`scenario`]: the file, its validated parameters ([`scenario::Params`],
//!   what overrides, sweeps and identification change), the build into blocks
//!   and the firmware's `LoopConfig`, and the one map from pi-core's field
//!   names to the paths the user wrote. It never designs.
//! * [`tuning`]: the design basis (derived values computed from the parameters
//!   when asked) and the survey of every design method, judged by one strict
//!   rule and chosen by modulus margin. It never reads a scenario.
//! * [`prepare`]: the one joint between the two: overrides applied before
//!   anything is designed, missing gains designed.
//! * [`spec`]: the limits a step should meet and a predicted step (a leaf).
//! * [`results`]: step metrics (pi-core's one routine), the verdict (pi-core's
//!   one rule) and the run's report.
//! * [`plot`]: SVG (step response, root locus, frequency response).
//! * [`cli`]: the `ampwright` command, one file per command, each owning its
//!   arguments: parse, call, print.
//! * [`bench`](mod@bench): captures from the bench read from CSV, the load
//!   identified from them, the host side of the bench link and the virtual
//!   board (the simulator behind pi-core's own link handler).
//! * [`bringup`]: the board commands' work over the link (identification on
//!   the board, a step, the guided bring-up that designs, writes, verifies
//!   and compares).
//! * [`demo`]: the built-in invented machine and board.
//!
//! Model parameters that are out of range are refused with a [`ModelError`]
//! naming the field (or the command-line option that set it).

pub mod bench;
pub mod bringup;
pub mod cli;
pub mod demo;
pub mod model_error;
pub mod plant;
pub mod plot;
pub mod prepare;
pub mod results;
pub mod scenario;
pub mod sim;
pub mod spec;
pub mod sweep;
pub mod tuning;

pub use model_error::ModelError;
pub use scenario::{Scenario, ScenarioError};
pub use sim::runner::{Controller, DriveChain, Event, LinearPi, Runner};
pub use sim::trace::{Trace, TracePoint};
