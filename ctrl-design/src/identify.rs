//! (module identify: work in progress, see DEVELOPERS.md)
