//! Synthetic studies with known truth: layouts, designs, a physically plausible
//! climate field, logger exports with injected faults, and a trait with known
//! effects. Output is a complete study folder that the other stages read.
