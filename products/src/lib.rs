//! Writes the outputs of an exobound run — a CF-convention NetCDF-3 file and PNG or SVG plots — without
//! depending on the engine: the host fills a [`Dataset`] or a plot description and calls in here.

pub mod canvas;
pub mod colour;
pub mod dataset;
mod error;
pub mod font;
pub mod netcdf;
pub mod plots;
pub mod text;
pub mod ticks;

pub use colour::{colour, diverging};
pub use dataset::{AttrValue, Dataset, Variable, swap_outer_axes};
pub use error::ProductError;
pub use netcdf::{read_netcdf, write_netcdf};
pub use plots::{
    CellMarks, ColourScale, Line, LinePlot, LineStyle, MapPanels, MapPlot, Marker, Overlay,
    draw_lines, draw_map, draw_map_panels,
};
