//! The one typeface of every plot, compiled into the binary so that drawing text needs no
//! fontconfig, freetype or installed fonts. It is DejaVu Sans (regular and bold) as shipped by
//! the `dejavu` crate; licence: the Bitstream Vera Fonts licence, with the DejaVu changes in the
//! public domain (freely redistributable, see the licence inside that crate).

use std::sync::OnceLock;

use plotters::style::FontStyle;

use crate::ProductError;

/// The family name under which the embedded font is registered with plotters.
pub const FAMILY: &str = "exobound-sans";

/// Registers the embedded font with plotters (once per process; later calls are free).
pub fn ensure_registered() -> Result<(), ProductError> {
    static REGISTERED: OnceLock<Result<(), String>> = OnceLock::new();
    REGISTERED
        .get_or_init(|| {
            let fonts = [
                ("regular", FontStyle::Normal, dejavu::sans::regular()),
                ("bold", FontStyle::Bold, dejavu::sans::bold()),
            ];
            for (name, style, bytes) in fonts {
                plotters::style::register_font(FAMILY, style, bytes)
                    .map_err(|_| format!("the embedded {name} font could not be loaded"))?;
            }
            Ok(())
        })
        .clone()
        .map_err(ProductError::content)
}
