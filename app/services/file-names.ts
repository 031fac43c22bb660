/**
 * A file name as people typed it, made safe to store and show: control characters
 * (U+0000–U+001F, U+007F–U+009F; tabs and line breaks become spaces) and the bidirectional formatting marks that can make a
 * name read differently from what it is (U+061C, U+200E–U+200F, U+202A–U+202E,
 * U+2066–U+2069) are removed, whitespace runs become one space, and the result is
 * trimmed and kept to 255 characters. An empty result becomes "file".
 */
// eslint-disable-next-line no-control-regex
const unsafe = /[\u0000-\u001f\u007f-\u009f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]/g;

export function cleanFileName(name: string): string {
  const cleaned = name
    .replace(/[\t\r\n]+/g, " ")
    .replace(unsafe, "")
    .replace(/\s+/g, " ")
    .trim();
  return cleaned ? Array.from(cleaned).slice(0, 255).join("") : "file";
}
