//! Trapezoidal motion profiles (work in progress).
