//! emberfit: turns cone calorimeter and milligram-scale test data into a calibrated pyrolysis
//! model and predicts untested conditions. The architecture is described in DEVELOPERS.md.

pub mod case;
pub mod cluster;
pub mod data;
pub mod export;
pub mod fit;
pub mod headless;
pub mod input;
pub mod limits;
pub mod microscale;
pub mod physics;
pub mod predict;
pub mod present;
pub mod run;
pub mod synthetic;
pub mod tui;
