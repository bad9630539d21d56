#pragma once
/// The SVG canvas under report/svg_plot: how numbers, text and the few element shapes the
/// figures use are written. Pixel coordinates are fixed-point with one decimal and clamped to
/// ±kPixelClamp, so a point far outside an axis still gives sane SVG (the panel's clip path hides
/// it); every user string goes through xml_escape, so the document is always well-formed XML.
/// Text is laid out without font metrics: widths are estimated from an average glyph advance.
///
/// Usage:
///   std::string s = "<text x=\"" + svg::px(x) + "\">" + xml_escape(name) + "</text>\n";
#include <string>
#include <string_view>

namespace periodfit::report {

/// `text` made safe for XML/HTML text and attribute values: & < > " ' become entities; control
/// characters other than tab/newline and invalid UTF-8 bytes become U+FFFD.
std::string xml_escape(std::string_view text);

enum class Marker { circle, square };

namespace svg {

/// Pixel coordinates are clamped to this (see the header comment).
inline constexpr double kPixelClamp = 1e5;
inline constexpr double kFontSize = 12;
inline constexpr double kTitleFontSize = 15;

/// `v` with `decimals` fixed decimals ("0" for a non-finite value, no "-0").
std::string fixed(double v, int decimals);

/// A pixel coordinate: one decimal, clamped to ±kPixelClamp.
std::string px(double v);

/// Estimated width in px of `s` (UTF-8) in a sans-serif font of `font_size`.
double text_width(std::string_view s, double font_size = kFontSize);

/// `id` reduced to an XML name: letters, digits, '-' and '_', starting with a letter.
std::string sanitize_id(std::string_view id);

/// A marker centred at (x, y): a circle of radius `size` or a square of half side `size`.
std::string marker(Marker marker, double x, double y, double size);

/// The opening of a rect element with its geometry, `<rect x=… y=… width=… height=…`, for the
/// caller to add attributes and close.
std::string rect_open(double x, double y, double width, double height);

/// A clipPath element `id` holding one rectangle.
std::string clip_path(const std::string& id, double x, double y, double width, double height);

}  // namespace svg
}  // namespace periodfit::report
