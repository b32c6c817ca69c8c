//! Thermocouple tolerance classes (in progress).
