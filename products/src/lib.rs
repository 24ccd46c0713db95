//! Writes the outputs of an exobound run — a CF-convention NetCDF-3 file and PNG plots — without
//! depending on the engine: the host fills a [`Dataset`] or a plot description and calls in here.

pub mod colour;
pub mod dataset;
mod error;
pub mod font;
pub mod netcdf;
pub mod plots;
mod raster;
pub mod text;
pub mod ticks;

pub use colour::colour;
pub use dataset::{AttrValue, Dataset, Variable, swap_outer_axes};
pub use error::ProductError;
pub use netcdf::{read_netcdf, write_netcdf};
pub use plots::{
    Line, LinePlot, LineStyle, MapPanels, MapPlot, Marker, Overlay, draw_lines, draw_map,
    draw_map_panels,
};
