//! SVG to PNG through resvg. The SVG names the generic "sans-serif" family and needs no
//! font of its own; the PNG needs one to draw the text: a regular upright sans-serif face
//! from the system's font folders (fontconfig's list), chosen in name order so the same
//! machine always gives the same picture. Without any font the PNG is refused with a
//! sentence saying so (the SVG still works).

use crate::error::{Error, Result};
use resvg::{tiny_skia, usvg};

/// The system's fonts, with the generic sans-serif family pointed at one that exists.
pub fn fonts() -> Result<usvg::fontdb::Database> {
    let mut db = usvg::fontdb::Database::new();
    db.load_system_fonts();
    if db.is_empty() {
        crate::fail!(
            "a PNG needs a font to draw its text and none was found in the system's font folders; install a TrueType or OpenType font package, or write an .svg"
        );
    }
    // Regular, upright, proportional faces whose family says "Sans" (and not "Mono" or
    // "Serif") first; then any regular proportional face; then any face at all.
    let mut ranked: Vec<(u8, String)> = db
        .faces()
        .filter_map(|f| {
            let name = f.families.first()?.0.clone();
            let regular = f.weight.0 == 400 && f.style == usvg::fontdb::Style::Normal;
            let sans = name.contains("Sans") && !name.contains("Mono") && !name.contains("Serif");
            let rank = match (regular && !f.monospaced, sans) {
                (true, true) => 0,
                (true, false) => 1,
                _ => 2,
            };
            Some((rank, name))
        })
        .collect();
    ranked.sort();
    if let Some((_, name)) = ranked.into_iter().next() {
        db.set_sans_serif_family(name);
    }
    Ok(db)
}

/// Render SVG text to a pixmap with the given fonts (tests use this to look at pictures).
pub fn rasterize(
    svg: &str,
    db: std::sync::Arc<usvg::fontdb::Database>,
) -> Result<tiny_skia::Pixmap> {
    let opt = usvg::Options {
        fontdb: db,
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(svg, &opt)
        .map_err(|e| Error::new(format!("the plot's SVG does not parse: {e}")))?;
    let size = tree.size().to_int_size();
    let mut pix = tiny_skia::Pixmap::new(size.width(), size.height())
        .ok_or_else(|| Error::new("the plot has no area to draw"))?;
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pix.as_mut());
    Ok(pix)
}

/// PNG bytes of an SVG picture.
pub fn svg_to_png(svg: &str) -> Result<Vec<u8>> {
    let pix = rasterize(svg, std::sync::Arc::new(fonts()?))?;
    pix.encode_png()
        .map_err(|e| Error::new(format!("cannot encode the PNG: {e}")))
}
