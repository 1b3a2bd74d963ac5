//! Shared helpers for the hardware-free suites: the invented demo board.
