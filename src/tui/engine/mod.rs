//! The analysis side of the app, in four parts:
//!
//! - `messages`: what the screen and the engine say to each other (commands, snapshots).
//! - `core`: the `Engine`, which owns the `Analysis` and prepares saves.
//! - `saver`: owns the recording and the run files; its own thread in the app.
//! - `worker`: the app's threads: a pump off the acquisition, the engine, the saver.
//!
//! Tests and the bench drive the engine inline (`App::headless`); the app runs `worker`.

mod core;
mod messages;
pub(crate) mod saver;
mod worker;

pub use core::{Engine, EngineSetup};
pub use messages::*;
pub use worker::{Worker, spawn_worker};
