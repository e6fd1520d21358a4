//! The bundled DejaVu Sans face (licence in `assets/fonts/LICENSE-DejaVu.txt`), registered
//! once with plotters so plots render the same on every machine without system fonts.

use std::sync::OnceLock;

use plotters::style::FontStyle;

static DEJAVU_SANS: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Family name the plots use. Registered under the generic CSS name so that browsers
/// showing the SVG pick a sans-serif face too.
pub const FAMILY: &str = "sans-serif";

static REGISTERED: OnceLock<bool> = OnceLock::new();

/// Registers the face on first use; `false` if the bundled file could not be parsed.
pub fn ensure_registered() -> bool {
    *REGISTERED.get_or_init(|| {
        plotters::style::register_font(FAMILY, FontStyle::Normal, DEJAVU_SANS).is_ok()
    })
}
