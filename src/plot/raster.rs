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
    encode_png(&pix)
}

/// A pixmap as PNG, lossless and small: 8-bit RGB when every pixel is opaque (our pictures
/// have a white ground), else RGBA; the strongest compression with a filter chosen per row.
/// The pixmap's RGBA is premultiplied; an opaque pixel is the same either way, and a
/// translucent one is turned back to straight alpha.
pub fn encode_png(pix: &tiny_skia::Pixmap) -> Result<Vec<u8>> {
    let opaque = pix.pixels().iter().all(|p| p.alpha() == 255);
    let data: Vec<u8> = if opaque {
        pix.pixels()
            .iter()
            .flat_map(|p| [p.red(), p.green(), p.blue()])
            .collect()
    } else {
        pix.pixels()
            .iter()
            .flat_map(|p| {
                let c = p.demultiply();
                [c.red(), c.green(), c.blue(), c.alpha()]
            })
            .collect()
    };
    let fail = |e: png::EncodingError| Error::new(format!("cannot encode the PNG: {e}"));
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, pix.width(), pix.height());
        enc.set_color(if opaque {
            png::ColorType::Rgb
        } else {
            png::ColorType::Rgba
        });
        enc.set_depth(png::BitDepth::Eight);
        enc.set_compression(png::Compression::Best);
        enc.set_adaptive_filter(png::AdaptiveFilterType::Adaptive);
        let mut w = enc.write_header().map_err(fail)?;
        w.write_image_data(&data).map_err(fail)?;
        w.finish().map_err(fail)?;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn png_round_trip_is_lossless() {
        let mut pix = tiny_skia::Pixmap::new(3, 2).unwrap();
        pix.fill(tiny_skia::Color::from_rgba8(250, 250, 250, 255));
        let mut paint = tiny_skia::Paint::default();
        paint.set_color_rgba8(10, 120, 200, 255);
        pix.fill_rect(
            tiny_skia::Rect::from_xywh(0.0, 0.0, 1.0, 1.0).unwrap(),
            &paint,
            tiny_skia::Transform::identity(),
            None,
        );
        let bytes = encode_png(&pix).unwrap();
        let back = tiny_skia::Pixmap::decode_png(&bytes).unwrap();
        assert_eq!(back.data(), pix.data());
        // Opaque: stored as RGB (colour type 2 in the header's IHDR chunk, byte 25).
        assert_eq!(bytes[25], 2);
        // Translucent: stored as RGBA (colour type 6) and read back the same.
        let mut t = tiny_skia::Pixmap::new(2, 2).unwrap();
        t.fill(tiny_skia::Color::from_rgba8(200, 40, 40, 128));
        let bytes = encode_png(&t).unwrap();
        assert_eq!(bytes[25], 6);
        let back = tiny_skia::Pixmap::decode_png(&bytes).unwrap();
        for (a, b) in back.pixels().iter().zip(t.pixels()) {
            assert!((i32::from(a.red()) - i32::from(b.red())).abs() <= 1);
            assert_eq!(a.alpha(), b.alpha());
        }
    }
}
