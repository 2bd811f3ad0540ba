//! (module design_file: work in progress, see DEVELOPERS.md)
