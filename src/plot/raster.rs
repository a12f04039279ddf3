//! SVG to PNG through resvg. The SVG names the generic "sans-serif" family and needs no
//! font of its own; the PNG needs one to draw the text: the first sans-serif face found in
//! the system's font folders (fontconfig's list), "DejaVu Sans" when present. Without any
//! font the PNG is refused with a sentence saying so (the SVG still works).

use crate::error::{Error, Result};
use resvg::{tiny_skia, usvg};

/// Font families tried in order for "sans-serif" (common on Linux, macOS and Windows).
const SANS: [&str; 5] = [
    "DejaVu Sans",
    "Liberation Sans",
    "Noto Sans",
    "Helvetica",
    "Arial",
];

/// The system's fonts, with the generic sans-serif family pointed at one that exists.
pub fn fonts() -> Result<usvg::fontdb::Database> {
    let mut db = usvg::fontdb::Database::new();
    db.load_system_fonts();
    if db.is_empty() {
        crate::fail!(
            "a PNG needs a font to draw its text and none was found in the system's font folders; install one (on Debian: fonts-dejavu-core) or write an .svg"
        );
    }
    let families: Vec<String> = db
        .faces()
        .flat_map(|f| f.families.iter().map(|(n, _)| n.clone()))
        .collect();
    let pick = SANS
        .iter()
        .find(|s| families.iter().any(|f| f == *s))
        .map(|s| s.to_string())
        .or_else(|| families.first().cloned());
    if let Some(p) = pick {
        db.set_sans_serif_family(p);
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
