//! Configuration: the TOML schema, the material library, loading with
//! environment overrides, and validation into the engine's [`Plan`].
//!
//! A configuration is read with the `config` crate (file, then
//! `LIFELEDGER__SECTION__KEY` environment overrides), deserialized into the
//! typed structs of [`schema`] (unknown keys are errors), and then checked
//! by [`validate`], which collects every problem at once and names the
//! file, the component, the key and the fix.
//!
//! Grade files can be included whole ([`material_file`]).
//!
//! [`Plan`]: crate::engine::Plan

pub mod library;
pub mod material_file;
pub mod schema;
pub mod schema_check;
pub mod validate;

pub use schema::Settings;
pub use validate::{load_plan, load_plan_with, plan_settings, ConfigError, ConfigProblem, LoadedConfig, Overrides};
