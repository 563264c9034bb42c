//! Parameter sweeps: many runs of one base scenario, and their gather.
pub mod gather;
