// Numbers in files Plumbline reads (uploads, the command line) are written in plain decimal notation.

/** Decimal notation, /^[+-]?(\d+\.?\d*|\.\d+)$/, tested by character codes: it runs on every numeric cell of a file. */
function isDecimal(v: string): boolean {
  const n = v.length;
  let i = n > 0 && (v.charCodeAt(0) === 43 || v.charCodeAt(0) === 45) ? 1 : 0;
  let digits = 0;
  let point = false;
  for (; i < n; i++) {
    const c = v.charCodeAt(i);
    if (c >= 48 && c <= 57) digits++;
    else if (c === 46 && !point) point = true;
    else return false;
  }
  return digits > 0;
}

/**
 * The value of a cell in decimal notation (optional sign, digits, optional fraction; spaces around are ignored), or
 * NaN. JavaScript's Number() also reads 0x10, 0b1, 0o7, 1e3 and Infinity; a clinical extract never means those, and
 * "0b1" read as 1 would be a risk of 100 %, so they are refused rather than guessed.
 */
export function parseDecimal(text: string | undefined): number {
  if (text === undefined) return NaN;
  const v =
    text.length > 0 && (text.charCodeAt(0) === 32 || text.charCodeAt(text.length - 1) === 32) ? text.trim() : text;
  return isDecimal(v) ? Number(v) : NaN;
}
