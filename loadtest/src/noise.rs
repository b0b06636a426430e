//! The noise guard's thresholds: how quiet the machine must be before a
//! run, and when other work or the hypervisor spoiled one (it is then
//! marked `noisy` and redone). loadtest/README.md ("A shared machine is
//! noisy") states them.

/// Before a run, wait for a second in which the machine's busy CPU is
/// under this many cores.
pub const QUIET_CORES: f64 = 0.25;

/// A run during which other work took more than this many cores is noisy.
pub const NOISY_OTHER_CORES: f64 = 0.2;

/// A run during which the hypervisor stole more than this many cores is
/// noisy.
pub const NOISY_STOLEN_CORES: f64 = 0.05;
