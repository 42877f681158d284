"""The Earth: time scales and sidereal angle, frames and geodesy, the Sun."""
