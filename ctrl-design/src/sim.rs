//! (module sim: work in progress, see DEVELOPERS.md)
