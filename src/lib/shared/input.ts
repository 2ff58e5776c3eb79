/**
 * Input rules shared by every endpoint: JSON nesting depth, real calendar dates, and the characters a stored
 * display text (a person's or model's name, a file name, a site) may keep.
 */

/** Deepest nesting of arrays and objects accepted in a request body; no Offsetry document nests past 10. */
export const MAX_JSON_DEPTH = 64;

/** The depth of the deepest array/object nesting in JSON text (strings skipped), without parsing it. */
export function jsonDepth(text: string): number {
  let depth = 0;
  let deepest = 0;
  let inString = false;
  for (let k = 0; k < text.length; k++) {
    const c = text.charCodeAt(k);
    if (inString) {
      if (c === 0x5c) k++; // backslash: skip the escaped character
      else if (c === 0x22) inString = false;
    } else if (c === 0x22) inString = true;
    else if (c === 0x5b || c === 0x7b) {
      if (++depth > deepest) deepest = depth;
    } else if (c === 0x5d || c === 0x7d) depth--;
  }
  return deepest;
}

/**
 * A real calendar date written YYYY-MM-DD inside [min, max] (strings compare as dates in this form). Year 0
 * does not exist (PostgreSQL refuses it), February has 28 or 29 days, months 1–12.
 */
export function isCalendarDate(s: string, min = '1900-01-01', max = '2199-12-31'): boolean {
  const m = /^(\d{4})-(\d{2})-(\d{2})$/.exec(s);
  if (!m) return false;
  const [y, mo, d] = [Number(m[1]), Number(m[2]), Number(m[3])];
  if (y < 1 || mo < 1 || mo > 12 || d < 1) return false;
  const leap = (y % 4 === 0 && y % 100 !== 0) || y % 400 === 0;
  const days = [31, leap ? 29 : 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31][mo - 1]!;
  return d <= days && s >= min && s <= max;
}

// C0 and C1 controls (tab and line breaks kept where a text may have lines), and the invisible formatting
// characters that reorder or hide text on screen: bidi embeddings, overrides and isolates, marks, zero-width
// spaces, word joiners and the byte-order mark.
const CONTROLS = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f-\u009f]/g;
const LINE_BREAKS = /[\t\n\r]/g;
const INVISIBLE = /[\u061c\u200b-\u200f\u202a-\u202e\u2060-\u2064\u2066-\u206f\ufeff\ufff9-\ufffb]/g;

/** A display text as it is stored and shown: NFC, no control or bidi characters; `multiline` keeps tab and line breaks. */
export function cleanText(s: string, multiline = false): string {
  let out = s.normalize('NFC').replace(CONTROLS, '').replace(INVISIBLE, '');
  if (!multiline) out = out.replace(LINE_BREAKS, ' ');
  return out.trim();
}
