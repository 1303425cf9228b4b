//! Plots (SVG and PNG).
