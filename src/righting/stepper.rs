//! Stepping through a plan by hand (written next).
